// The report's style sheet and its one script, kept apart from the code
// that draws the page.
#include "output/report_parts.h"

namespace paritas::internal::report {

const char* const kStyle = R"css(
:root{--ink:#1d2329;--muted:#5b6670;--rule:#d5dbe0;--bg:#ffffff;--panel:#f5f7f9;--accent:#14406b}
*{box-sizing:border-box}
html{font-size:15px}
body{margin:0;color:var(--ink);background:var(--bg);font-family:system-ui,-apple-system,"Segoe UI",Roboto,"Helvetica Neue",Arial,"Liberation Sans",sans-serif;line-height:1.45;font-variant-numeric:tabular-nums}
header.top{background:var(--accent);color:#fff;padding:22px 0 18px}
header.top .wrap{display:flex;justify-content:space-between;align-items:flex-end;gap:16px;flex-wrap:wrap}
header.top h1{margin:0;font-size:1.7rem;font-weight:600;letter-spacing:.01em}
header.top .sub{opacity:.85;font-size:.93rem}
.wrap{max-width:1080px;margin:0 auto;padding:0 24px}
nav.toc{border-bottom:1px solid var(--rule);background:var(--panel);font-size:.9rem}
nav.toc .wrap{display:flex;flex-wrap:wrap;gap:4px 18px;padding-top:8px;padding-bottom:8px}
nav.toc a{color:var(--accent);text-decoration:none}
nav.toc a:hover{text-decoration:underline}
section{padding:10px 0 18px;border-bottom:1px solid var(--rule)}
section:last-of-type{border-bottom:0}
h2{font-size:1.3rem;margin:18px 0 8px;color:var(--accent);font-weight:600}
h3{font-size:1.02rem;margin:18px 0 6px}
p{margin:6px 0 10px;max-width:78ch}
p.lead{font-size:1.05rem}
p.note{color:var(--muted);font-size:.87rem}
code{font-family:ui-monospace,"DejaVu Sans Mono","Liberation Mono",monospace;font-size:.86em;overflow-wrap:anywhere}
.cards{display:flex;flex-wrap:wrap;gap:10px;margin:10px 0 14px}
.card{background:var(--panel);border:1px solid var(--rule);border-radius:6px;padding:8px 14px;min-width:112px}
.card .value{font-size:1.35rem;font-weight:600}
.card .label{font-size:.8rem;color:var(--muted)}
table{border-collapse:collapse;font-size:.88rem}
table.facts th{text-align:left;font-weight:600;padding:3px 18px 3px 0;color:var(--muted);vertical-align:top}
table.facts td{padding:3px 0}
table.data{margin:6px 0;min-width:50%}
table.data th,table.data td{padding:4px 10px;border-bottom:1px solid var(--rule);text-align:left;white-space:nowrap}
table.data thead th{background:var(--panel);border-bottom:2px solid #b9c2ca;font-weight:600;position:sticky;top:0;white-space:normal;vertical-align:bottom;min-width:6ch}
table.data .num{text-align:right}
table.data.wrap td{white-space:normal;vertical-align:top}
table.data .long{min-width:16ch;max-width:40ch}
table.sortable thead th{cursor:pointer}
table.sortable thead th[aria-sort=ascending]::after{content:" \25B2";font-size:.7em}
table.sortable thead th[aria-sort=descending]::after{content:" \25BC";font-size:.7em}
.table-scroll{overflow:auto;max-width:100%}
.table-scroll.tall{max-height:640px;border:1px solid var(--rule)}
ul.warnings li{color:#7a3b00}
a.warn{color:#b04a00;text-decoration:none}
svg.chart{display:block;width:100%;height:auto;margin:8px 0}
svg text{font-family:inherit;font-size:12px;fill:var(--ink)}
svg .tick{font-size:11px;fill:var(--muted)}
svg .axis-title{font-size:12px;fill:var(--muted)}
svg .row-label{font-size:12px}
svg .col-label{font-size:11.5px}
svg .strong{font-weight:700}
svg .value{font-size:11.5px}
svg .muted{fill:var(--muted)}
svg .grid{stroke:#e3e7eb;stroke-width:1}
svg .axis{stroke:#8a949c;stroke-width:1}
svg .reference{stroke:#1d2329;stroke-width:1.2;stroke-dasharray:4 3}
svg .pl-bar{stroke:rgba(0,0,0,.45);stroke-width:.6}
svg .pl-bar.compact{stroke:none}
svg .whisker{stroke:#1d2329;stroke-width:1.3;fill:none}
svg .halo{stroke:#fff;stroke-width:3.2;fill:none;opacity:.85}
svg .whisker.thin{stroke-width:.6;opacity:.6}
svg .cell{stroke:#fff;stroke-width:1}
svg .cell.none{fill:#fff;stroke:#c8cfd5;stroke-dasharray:2 2}
svg .cell-value{font-size:10.5px;fill:#111}
svg .cell-value.on-dark{fill:#fff}
svg .hist-bar{fill:#3b6f9e}
svg .line{fill:none;stroke:#14406b;stroke-width:2}
svg .dot{fill:#14406b}
svg .range{stroke:#9aa5ae;stroke-width:3;stroke-linecap:round}
svg .main-mark{stroke:#1d2329;stroke-width:2}
svg .marker{fill:#14406b;stroke:#fff;stroke-width:.8}
svg .marker.m0{fill:#0072b2}svg .marker.m1{fill:#d55e00}svg .marker.m2{fill:#009e73}
svg .marker.m3{fill:#cc79a7}svg .marker.m4{fill:#e69f00}svg .marker.m5{fill:#56b4e9}
svg .marker.m6{fill:#1d2329}svg .marker.m7{fill:#8c564b}
svg .marker.open{fill:#fff;stroke-width:1.5}
svg .marker.open.m0{stroke:#0072b2}svg .marker.open.m1{stroke:#d55e00}
svg .marker.open.m2{stroke:#009e73}svg .marker.open.m3{stroke:#cc79a7}
svg .marker.open.m4{stroke:#e69f00}svg .marker.open.m5{stroke:#56b4e9}
svg .marker.open.m6{stroke:#1d2329}svg .marker.open.m7{stroke:#8c564b}
svg.grid-chart{width:100%}
.multiples{display:grid;grid-template-columns:repeat(auto-fill,minmax(230px,1fr));gap:8px 14px;margin:8px 0}
svg.panel{display:block;width:100%;height:auto;border:1px solid var(--rule);border-radius:4px}
.legend-row{display:flex;flex-wrap:wrap;align-items:center;gap:6px 22px;margin:4px 0 6px;font-size:.85rem;color:var(--muted)}
.legend-row .key{display:inline-flex;align-items:center;gap:6px}
svg.legend text{font-size:11px}
dl.methods dt{font-weight:600;margin-top:10px}
dl.methods dd{margin:2px 0 4px 0;max-width:84ch}
ul.cautions li{margin:4px 0;max-width:84ch}
footer{color:var(--muted);font-size:.82rem;padding:14px 0 30px}
@media (max-width:720px){
  .wrap{padding:0 12px}
  section{overflow-x:auto}
  svg.chart{min-width:680px}
}
@media print{
  html{font-size:12px}
  header.top{background:none;color:var(--ink);border-bottom:2px solid var(--ink);padding:0 0 8px}
  nav.toc{display:none}
  .table-scroll.tall{max-height:none;overflow:visible;border:0}
  table.data thead th{position:static}
  section{break-inside:auto}
  svg.chart,h2,h3{break-inside:avoid;break-after:avoid-page}
  a{color:inherit;text-decoration:none}
}
)css";

// Sorts tables by clicking headings; marks the page ready (the browser test
// reads the mark) and records script errors as an attribute, so a failure
// is visible without a console.
const char* const kScript = R"js(
(function(){
  var root=document.documentElement;
  window.addEventListener('error',function(e){root.setAttribute('data-report-error',String(e.message))});
  function key(cell){var v=cell.getAttribute('data-v');if(v===null)return cell.textContent.trim().toLowerCase();return v===''?NaN:parseFloat(v);}
  Array.prototype.forEach.call(document.querySelectorAll('table.sortable'),function(table){
    var heads=table.tHead.rows[0].cells;
    Array.prototype.forEach.call(heads,function(th,col){
      th.tabIndex=0;
      function sort(){
        var asc=th.getAttribute('aria-sort')!=='ascending';
        Array.prototype.forEach.call(heads,function(h){h.removeAttribute('aria-sort')});
        th.setAttribute('aria-sort',asc?'ascending':'descending');
        var body=table.tBodies[0],rows=Array.prototype.slice.call(body.rows);
        rows.sort(function(a,b){
          var x=key(a.cells[col]),y=key(b.cells[col]);
          if(typeof x==='number'){if(isNaN(x))return isNaN(y)?0:1;if(isNaN(y))return -1;return asc?x-y:y-x;}
          return asc?x.localeCompare(y):y.localeCompare(x);
        });
        rows.forEach(function(r){body.appendChild(r)});
      }
      th.addEventListener('click',sort);
      th.addEventListener('keydown',function(e){if(e.key==='Enter'||e.key===' '){e.preventDefault();sort();}});
    });
  });
  root.setAttribute('data-report-ready','1');
})();
)js";

}  // namespace paritas::internal::report
