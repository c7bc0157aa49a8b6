// Layout checks run inside report.html by tests/report_browser_test.py: the
// test appends this script to a copy of the page, Chromium lays the page out
// at a given width (in a frame of that width when it is narrower than the
// browser's smallest window) and dumps the DOM, and the test reads the
// findings from <html data-layout-check="...">, a JSON object:
//   overlaps: pairs of <text> in one <svg> whose boxes overlap (each text's
//             box taken in its svg's own units, rotation included);
//   ticks:    histogram axis labels that do not sit on a bar edge;
//   marks:    method-spread marks that cover one another, or two methods
//             drawn alike, or one method drawn two ways;
//   legend:   chart marks with no legend entry, or legend entries that match
//             no mark;
//   overflow: elements wider than the window (the page scrolls sideways);
//   scrolls:  tables that fit their scroll box only by scrolling sideways;
//   texts, marks_checked: how many were looked at (a check that saw nothing
//             proves nothing).
(function() {
  var found = {overlaps: [], ticks: [], marks: [], legend: [], overflow: [], scrolls: [], texts: 0,
               marks_checked: 0, width: document.documentElement.clientWidth};
  // Boxes are shrunk by this much (svg units) on every side: glyph boxes
  // carry ascender and descender room, so touching rows are not overlaps.
  var SLACK = 1.0;

  // The text shown (a <title> child is a tooltip, not drawn).
  function label(el) {
    var text = '';
    Array.prototype.forEach.call(el.childNodes, function(n) {
      if (n.nodeName.toLowerCase() !== 'title') text += n.textContent;
    });
    return text.trim().slice(0, 40);
  }

  // The corners of an element's box in the coordinates of its nearest svg.
  function corners(el) {
    var b = el.getBBox();
    if (b.width <= 0 || b.height <= 0) return null;
    var m = el.getCTM();
    var pts = [[b.x + SLACK, b.y + SLACK], [b.x + b.width - SLACK, b.y + SLACK],
               [b.x + b.width - SLACK, b.y + b.height - SLACK], [b.x + SLACK, b.y + b.height - SLACK]];
    return pts.map(function(p) {
      return [m.a * p[0] + m.c * p[1] + m.e, m.b * p[0] + m.d * p[1] + m.f];
    });
  }

  // Separating-axis test for two convex quadrilaterals.
  function overlap(p, q) {
    var polys = [p, q];
    for (var s = 0; s < 2; ++s) {
      var poly = polys[s];
      for (var i = 0; i < 4; ++i) {
        var a = poly[i], b = poly[(i + 1) % 4];
        var nx = b[1] - a[1], ny = a[0] - b[0];
        var pmin = Infinity, pmax = -Infinity, qmin = Infinity, qmax = -Infinity;
        p.forEach(function(v) { var d = v[0] * nx + v[1] * ny; pmin = Math.min(pmin, d); pmax = Math.max(pmax, d); });
        q.forEach(function(v) { var d = v[0] * nx + v[1] * ny; qmin = Math.min(qmin, d); qmax = Math.max(qmax, d); });
        if (pmax <= qmin || qmax <= pmin) return false;
      }
    }
    return true;
  }

  function visible(el) {
    var style = getComputedStyle(el);
    return style.display !== 'none' && style.visibility !== 'hidden' && el.getClientRects().length > 0;
  }

  // 1. Text labels of every svg, pairwise.
  Array.prototype.forEach.call(document.querySelectorAll('svg'), function(svg, index) {
    var boxes = [];
    Array.prototype.forEach.call(svg.querySelectorAll('text'), function(t) {
      if (!label(t) || !visible(t)) return;
      var c = corners(t);
      if (c) boxes.push({el: t, c: c});
    });
    found.texts += boxes.length;
    for (var i = 0; i < boxes.length; ++i) {
      for (var j = i + 1; j < boxes.length; ++j) {
        if (overlap(boxes[i].c, boxes[j].c)) {
          found.overlaps.push((svg.id || svg.getAttribute('class') || 'svg #' + index) + ': "' +
                              label(boxes[i].el) + '" / "' + label(boxes[j].el) + '"');
        }
      }
    }
  });

  // 1b. Histogram labels on bar edges (a bar spans [x - 1, x + width + 1]).
  var histogram = document.getElementById('spread-histogram');
  if (histogram) {
    var edges = [];
    Array.prototype.forEach.call(histogram.querySelectorAll('rect.hist-bar'), function(bar) {
      var x = parseFloat(bar.getAttribute('x')), w = parseFloat(bar.getAttribute('width'));
      edges.push(x - 1, x + w + 1);
    });
    Array.prototype.forEach.call(histogram.querySelectorAll('text.x-tick'), function(t) {
      var x = parseFloat(t.getAttribute('x'));
      if (!edges.some(function(e) { return Math.abs(e - x) < 0.3; })) found.ticks.push(label(t) + ' at ' + x);
    });
    if (!histogram.querySelector('text.x-tick')) found.ticks.push('no axis labels');
  }

  // The look of a mark: its outline sampled at fixed fractions of its length
  // around its box centre, with its fill and stroke as drawn.
  function look(el) {
    var b = el.getBBox(), cx = b.x + b.width / 2, cy = b.y + b.height / 2;
    var shape = el.tagName;
    if (el.tagName === 'circle') {
      shape += ' r' + el.getAttribute('r');
    } else {
      var n = el.getTotalLength();
      for (var k = 0; k < 12; ++k) {
        var p = el.getPointAtLength(n * k / 12);
        shape += ' ' + Math.round(2 * (p.x - cx)) + ',' + Math.round(2 * (p.y - cy));
      }
    }
    var style = getComputedStyle(el);
    return {shape: shape, colour: style.fill + '|' + style.stroke, all: shape + '|' + style.fill + '|' + style.stroke};
  }

  // 2. Method-spread marks: one look per method, one method per look, no mark
  // covering another in a row, and every shape and colour in the legend.
  var spread = document.getElementById('method-spread');
  if (spread) {
    var byMethod = {}, byLook = {}, shapesOf = {}, coloursOf = {};
    var marks = Array.prototype.slice.call(spread.querySelectorAll('.marker'));
    found.marks_checked = marks.length;
    var boxes = [];
    marks.forEach(function(el) {
      var title = el.querySelector('title');
      var method = title ? title.textContent.split(':')[0] : '';
      if (!method) { found.marks.push('a mark without a method in its tooltip'); return; }
      var l = look(el);
      (byMethod[method] = byMethod[method] || {})[l.all] = true;
      (byLook[l.all] = byLook[l.all] || {})[method] = true;
      var parts = method.split('/');
      (shapesOf[parts[0]] = shapesOf[parts[0]] || {})[l.shape] = true;
      (coloursOf[parts[parts.length - 1]] = coloursOf[parts[parts.length - 1]] || {})[l.colour] = true;
      var r = el.getBBox();
      boxes.push({method: method, x0: r.x, x1: r.x + r.width, y0: r.y, y1: r.y + r.height});
    });
    Object.keys(byMethod).forEach(function(m) {
      if (Object.keys(byMethod[m]).length !== 1) found.marks.push(m + ' is drawn in more than one way');
    });
    Object.keys(byLook).forEach(function(k) {
      var ms = Object.keys(byLook[k]);
      if (ms.length !== 1) found.marks.push('one mark for ' + ms.join(' and '));
    });
    // A mark with half its box under another one is hidden for a reader.
    for (var i = 0; i < boxes.length; ++i) {
      for (var j = i + 1; j < boxes.length; ++j) {
        var a = boxes[i], b = boxes[j];
        var w = Math.min(a.x1, b.x1) - Math.max(a.x0, b.x0), h = Math.min(a.y1, b.y1) - Math.max(a.y0, b.y0);
        var smaller = Math.min((a.x1 - a.x0) * (a.y1 - a.y0), (b.x1 - b.x0) * (b.y1 - b.y0));
        if (w > 0 && h > 0 && w * h > 0.5 * smaller) found.marks.push(a.method + ' covers ' + b.method);
      }
    }
    // The legend: each elementary method's shape under its name, each
    // aggregation method's colour under its name.
    function entries(id) {
      var out = {};
      var row = document.getElementById(id);
      if (!row) return out;
      Array.prototype.forEach.call(row.querySelectorAll('.key'), function(key) {
        var mark = key.querySelector('.marker');
        if (mark) out[key.textContent.trim()] = look(mark);
      });
      return out;
    }
    var shapeKeys = entries('method-shapes'), colourKeys = entries('method-colours');
    Object.keys(shapesOf).forEach(function(name) {
      var key = shapeKeys[name];
      if (!key) { found.legend.push('method-spread: no shape entry for ' + name); return; }
      if (!shapesOf[name][key.shape]) found.legend.push('method-spread: the shape shown for ' + name + ' is not its marks\' shape');
    });
    Object.keys(coloursOf).forEach(function(name) {
      var key = colourKeys[name];
      if (!key) { found.legend.push('method-spread: no colour entry for ' + name); return; }
      if (!coloursOf[name][key.colour]) found.legend.push('method-spread: the colour shown for ' + name + ' is not its marks\' colour');
    });
    Object.keys(shapeKeys).forEach(function(name) { if (!shapesOf[name]) found.legend.push('method-spread: shape entry ' + name + ' matches no mark'); });
    Object.keys(colourKeys).forEach(function(name) { if (!coloursOf[name]) found.legend.push('method-spread: colour entry ' + name + ' matches no mark'); });
  }

  // 3. Other charts: a legend row after the chart names each kind of mark the
  // chart draws (intervals, cells without a value, a colour scale).
  Array.prototype.forEach.call(document.querySelectorAll('svg.chart'), function(svg) {
    if (svg.id === 'method-spread') return;
    var legend = null;
    for (var el = svg.nextElementSibling, k = 0; el && k < 3; el = el.nextElementSibling, ++k) {
      if (el.classList.contains('legend-row')) { legend = el; break; }
      if (el.tagName === 'SVG' || el.tagName === 'svg' || /^H[1-6]$/.test(el.tagName)) break;
    }
    var needs = [];
    if (svg.querySelector('.whisker')) needs.push(['.whisker', 'interval']);
    if (svg.querySelector('rect.cell.none')) needs.push(['rect.cell.none', 'no value']);
    if (svg.querySelector('rect.cell:not(.none)') || svg.querySelector('rect.pl-bar')) {
      needs.push(['svg.legend', 'colour scale']);
    }
    needs.forEach(function(need) {
      if (!legend || !legend.querySelector(need[0])) found.legend.push((svg.id || 'chart') + ': no legend entry for ' + need[1]);
    });
  });

  // 4. Nothing wider than the window.
  var width = document.documentElement.clientWidth;
  if (document.documentElement.scrollWidth > width + 1) {
    Array.prototype.forEach.call(document.querySelectorAll('body *'), function(el) {
      var r = el.getBoundingClientRect();
      if (r.right > width + 1 && found.overflow.length < 10) {
        var inside = el.parentElement && el.parentElement.closest('.table-scroll');
        if (!inside) found.overflow.push(el.tagName.toLowerCase() + (el.id ? '#' + el.id : '') + ' reaches ' + Math.round(r.right) + ' px');
      }
    });
    if (!found.overflow.length) found.overflow.push('the page is ' + document.documentElement.scrollWidth + ' px wide');
  }
  Array.prototype.forEach.call(document.querySelectorAll('.table-scroll'), function(box) {
    if (box.scrollWidth > box.clientWidth + 1) {
      var table = box.querySelector('table');
      found.scrolls.push((table && table.id ? table.id : 'table') + ' needs ' + box.scrollWidth + ' px in ' + box.clientWidth);
    }
  });
  document.documentElement.setAttribute('data-layout-check', JSON.stringify(found));
  // In a frame (the narrow layouts) the test dumps the outer page.
  if (window.parent !== window) {
    window.parent.document.documentElement.setAttribute('data-layout-check', JSON.stringify(found));
  }
})();
