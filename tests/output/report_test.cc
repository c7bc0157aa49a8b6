// Tests of the HTML report: escaping, sections, self-containment, optional
// parts and size at 1,000 regions. The report is built from real runs of the
// compute job (demo survey, synthetic surveys) so every section sees data of
// the shape it gets in use.
#include "paritas/output/report.h"

#include <cctype>
#include <cmath>
#include <regex>
#include <set>
#include <string>

#include <gtest/gtest.h>

#include "paritas/survey/config.h"
#include "paritas/jobs/jobs.h"
#include "paritas/base/text.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::SourcePath;

using ::paritas::testing::CountOf;

// The text of the element that opens with id="<id>", up to its </svg>.
std::string SvgById(const std::string& html, const std::string& id) {
  const size_t begin = html.find("id=\"" + id + "\"");
  if (begin == std::string::npos) return "";
  return html.substr(begin, html.find("</svg>", begin) - begin);
}

// Runs the compute job on a configuration, without writing the report, and
// returns the job summary for building reports in the test.
ComputeJobSummary RunJob(const std::string& config_path, const std::string& output) {
  RunConfig config;
  std::string error;
  EXPECT_TRUE(LoadRunConfig(config_path, &config, &error)) << error;
  config.output = output;
  config.report = false;
  ComputeJobSummary summary;
  EXPECT_EQ(RunCompute(config, &summary), kExitOk) << summary.message;
  return summary;
}

ReportInputs InputsFor(const ComputeJobSummary& job, const RunConfig* config) {
  ReportInputs in;
  in.config = config;
  in.survey = &job.survey;
  in.load = &job.load;
  in.result = &job.result;
  in.compute = &job.compute;
  in.warnings = job.warnings;
  return in;
}

// The demo survey, computed once for all tests.
struct Demo {
  RunConfig config;
  ComputeJobSummary job;
  Demo() {
    std::string error;
    EXPECT_TRUE(LoadRunConfig(SourcePath("config/demo.yaml"), &config, &error)) << error;
    job = RunJob(SourcePath("config/demo.yaml"), MakeTempDir("report_demo"));
  }
};
const Demo& TheDemo() {
  static const Demo* demo = new Demo();
  return *demo;
}

TEST(HtmlEscape, ShowsControlAndBidiOverrideCharactersVisibly) {
  // U+202E RIGHT-TO-LEFT OVERRIDE would display "cba" for "abc" after it.
  EXPECT_EQ(HtmlEscape("R1\xE2\x80\xAE" "abc"), "R1\\u202eabc");
  EXPECT_EQ(HtmlEscape("x\x1b[2Jy"), "x\\x1b[2Jy");
}

TEST(HtmlEscape, EscapesTheFiveMarkupCharacters) {
  EXPECT_EQ(HtmlEscape("<script>alert('x') & \"y\"</script>"),
            "&lt;script&gt;alert(&#39;x&#39;) &amp; &quot;y&quot;&lt;/script&gt;");
  EXPECT_EQ(HtmlEscape("Ålvik – plain"), "Ålvik – plain");  // UTF-8 passes through
}

TEST(ReportHtml, HasEverySectionAndOneBarPerRegionForTheDemo) {
  const Demo& demo = TheDemo();
  const std::string html = ReportHtml(InputsFor(demo.job, &demo.config));
  for (const char* id : {"overview", "warnings", "price-levels", "price-level-chart", "price-level-table",
                         "aggregates", "aggregate-grid", "matrix", "matrix-grid", "coverage", "coverage-grid",
                         "spread", "spread-histogram", "worst-pairs", "methods", "cautions"}) {
    EXPECT_NE(html.find("id=\"" + std::string(id) + "\""), std::string::npos) << id;
  }
  EXPECT_EQ(CountOf(html, "class=\"pl-bar\""), 16u);  // the demo has 16 regions, all with parities
  // The matrix grid shows all 16 x 16 cells; the coverage grid 29 headings x (16 regions + all).
  EXPECT_EQ(CountOf(SvgById(html, "matrix-grid"), "<rect class=\"cell\""), 256u);
  EXPECT_EQ(CountOf(SvgById(html, "coverage-grid"), "<rect class=\"cell"), 29u * 17u);
  // Dearest and cheapest regions of the demo (parities.csv of the demo run).
  EXPECT_NE(html.find("the dearest is <b>Aurelmont Capital Region</b> at 128.7"), std::string::npos);
  EXPECT_NE(html.find("official regional price levels come from the statistical authority"), std::string::npos);
}

TEST(ReportHtml, ShowsEveryAggregateAtAnyDepthInTheAggregateGrid) {
  // data/demo/classification.yaml: the root, 9 aggregates under it and
  // public_transport under transport, then the 2 groups of config/demo.yaml.
  const Demo& demo = TheDemo();
  const std::string grid = SvgById(ReportHtml(InputsFor(demo.job, &demo.config)), "aggregate-grid");
  EXPECT_EQ(CountOf(grid, "<rect class=\"cell"), 16u * (1 + 10 + 2));
  // The nested aggregate comes right after its parent, with its place in the tooltip.
  const size_t transport = grid.find(">Transport</text>");
  const size_t nested = grid.find(
      "<title>Public transport (public_transport), in All items \xE2\x80\xBA Transport</title>");
  ASSERT_NE(transport, std::string::npos);
  ASSERT_NE(nested, std::string::npos);
  EXPECT_LT(transport, nested);
  EXPECT_LT(nested, grid.find(">Communication</text>"));
}

TEST(ReportHtml, NamesRegionsInTheMatrixAndCoverageGridsWithTheCodeInTooltips) {
  const Demo& demo = TheDemo();
  const std::string html = ReportHtml(InputsFor(demo.job, &demo.config));
  for (const char* id : {"matrix-grid", "coverage-grid"}) {
    const std::string grid = SvgById(html, id);
    // The name (cut to fit a column title), the code in its tooltip.
    EXPECT_NE(grid.find("<title>Aurelmont Capital Region (cap)</title>Aurelmont Capital Reg"),
              std::string::npos)
        << id;
    EXPECT_EQ(grid.find(">cap</text>"), std::string::npos) << id;
  }
}

TEST(ReportHtml, PutsTheHistogramLabelsOnBarEdges) {
  // Worked by hand for the demo: the largest spread is 2.87 (the worst-pairs
  // table), 2.87 / 24 bins = 0.12 rounds up to a bin width of 0.2, so 15 bins
  // [0, 0.2) ... [2.8, 3.0); 15 edges to label are more than 8, so every
  // 2nd: 0.0, 0.4, ..., 2.8. The plot is 920 units wide from x = 60, so bar
  // i spans 60 + 920 i / 15 (+1 and -1 for the gap) and label j sits at
  // 60 + 920 (2 j) / 15.
  const Demo& demo = TheDemo();
  const std::string html = ReportHtml(InputsFor(demo.job, &demo.config));
  ASSERT_NE(SvgById(html, "worst-pairs").find(">2.87</td>"), std::string::npos);
  const std::string chart = SvgById(html, "spread-histogram");
  EXPECT_EQ(CountOf(chart, "class=\"hist-bar\""), 15u);
  for (int j = 0; j <= 7; ++j) {
    const std::string x = FormatFixed(60.0 + 920.0 * 2 * j / 15, 1);
    const std::string label = FormatFixed(0.4 * j, 1);
    EXPECT_NE(chart.find("class=\"tick x-tick\" x=\"" + x +
                         "\" y=\"216.0\" text-anchor=\"middle\">" + label + "</text>"),
              std::string::npos)
        << label;
  }
  EXPECT_EQ(CountOf(chart, "x-tick"), 8u);
}

TEST(ReportHtml, CitesItsSourcesWithoutAClaimOfMemory) {
  const Demo& demo = TheDemo();
  const std::string html = ReportHtml(InputsFor(demo.job, &demo.config));
  EXPECT_EQ(html.find("from memory"), std::string::npos);
  EXPECT_NE(html.find("Summers, R. (1973)"), std::string::npos);
}

TEST(ReportHtml, FormatsParitiesWithOneDecimalInChartsAndTwoInTables) {
  const Demo& demo = TheDemo();
  const std::string html = ReportHtml(InputsFor(demo.job, &demo.config));
  const NodeResult& root = demo.job.result.nodes.front();
  const int cap = demo.job.survey.regions.Find("cap");
  ASSERT_GE(cap, 0);
  EXPECT_NE(html.find(">" + FormatFixed(root.parity(cap), 1) + "</text>"), std::string::npos);
  EXPECT_NE(html.find(">" + FormatFixed(root.parity(cap), 2) + "</td>"), std::string::npos);
}

TEST(ReportHtml, RefersToNothingOutsideThePage) {
  const Demo& demo = TheDemo();
  const std::string html = ReportHtml(InputsFor(demo.job, &demo.config));
  for (const char* needle : {"http://", "https://", "src=", "<link", "@import", "url(http", "<img", "<iframe"}) {
    EXPECT_EQ(html.find(needle), std::string::npos) << needle;
  }
  EXPECT_EQ(CountOf(html, "<script"), 1u);  // the one small sorting script
  EXPECT_EQ(CountOf(html, "<style"), 1u);
}

TEST(ReportHtml, LeavesOptionalSectionsOutWhenTheirInputsAreNull) {
  const Demo& demo = TheDemo();
  const std::string html = ReportHtml(InputsFor(demo.job, &demo.config));
  EXPECT_EQ(html.find("id=\"outliers\""), std::string::npos);
  EXPECT_EQ(html.find("id=\"sensitivity\""), std::string::npos);
  EXPECT_EQ(html.find("class=\"whisker\""), std::string::npos);
}

TEST(ReportHtml, ShowsOutliersAndSensitivityWhenGiven) {
  const Demo& demo = TheDemo();
  ReportInputs in = InputsFor(demo.job, &demo.config);
  const std::vector<ReportOutlier> outliers = {
      {"meat", "cap", "<b>beef</b>", 30.0, 10.0, 5.2, 3, "Meat & fish", "Beef <1 kg>"},
      {"fruit", "fen", "apples", 1.0, 2.5, -4.1, 2, "", ""}};
  const int num_regions = demo.job.survey.num_regions();
  ReportSensitivity sensitivity;
  const NodeResult& root = demo.job.result.nodes.front();
  std::vector<double> alternative(num_regions);
  for (int r = 0; r < num_regions; ++r) {
    sensitivity.parity_lower.push_back(root.parity(r) * 0.98);
    sensitivity.parity_upper.push_back(root.parity(r) * 1.02);
    alternative[r] = root.parity(r) * (r % 2 ? 1.01 : 0.99);
  }
  sensitivity.coverage_curve = {{1.0, 0.0}, {0.8, 0.4}, {0.5, 1.1}};
  sensitivity.method_names = {"geks-tornqvist"};
  sensitivity.method_parity = {alternative};
  in.outliers = &outliers;
  in.sensitivity = &sensitivity;
  const std::string html = ReportHtml(in);
  EXPECT_NE(html.find("id=\"outliers\""), std::string::npos);
  EXPECT_NE(html.find("&lt;b&gt;beef&lt;/b&gt;"), std::string::npos);
  EXPECT_EQ(html.find("<b>beef"), std::string::npos);
  // Labels beside the codes, escaped; none beside codes without one.
  EXPECT_NE(html.find("<td>meat <small>Meat &amp; fish</small></td>"), std::string::npos);
  EXPECT_NE(html.find("&lt;/b&gt; <small>Beef &lt;1 kg&gt;</small></td>"), std::string::npos);
  EXPECT_NE(html.find("<td>fruit</td>"), std::string::npos);
  EXPECT_NE(html.find("id=\"sensitivity\""), std::string::npos);
  EXPECT_NE(html.find("id=\"coverage-curve\""), std::string::npos);
  EXPECT_NE(html.find("id=\"method-spread\""), std::string::npos);
  EXPECT_EQ(CountOf(html, "class=\"whisker\" d="), static_cast<size_t>(num_regions));  // one interval per bar
  // Largest |standardised residual| first in the table.
  EXPECT_LT(html.find("&lt;b&gt;beef"), html.find(">apples<"));
}

// The marks drawn in the method-spread chart's first row, in order: each
// mark's element and class up to its first coordinate (shape and colour).
std::vector<std::string> FirstRowMarks(const std::string& html) {
  const size_t chart = html.find("id=\"method-spread\"");
  const size_t row_end = html.find("class=\"value\"", chart);
  std::vector<std::string> marks;
  for (size_t at = html.find("class=\"marker", chart); at < row_end;
       at = html.find("class=\"marker", at + 1)) {
    const size_t tag = html.rfind('<', at);
    const std::string cls = html.substr(at, html.find('"', at + 7) - at);
    // The shape: the element and the path's command letters (coordinates dropped).
    std::string commands;
    const size_t d = html.find(" d=\"", at);
    if (html.compare(tag, 5, "<path") == 0 && d < html.find('>', at)) {
      for (size_t i = d + 4; html[i] != '"'; ++i) {
        if (std::isalpha(static_cast<unsigned char>(html[i])) != 0) commands += html[i];
      }
    }
    marks.push_back(html.substr(tag, html.find(' ', tag) - tag) + " " + cls + " " + commands);
  }
  return marks;
}

TEST(ReportHtml, GivesEveryMethodCombinationItsOwnMarkAndLegendEntry) {
  // Shape = elementary method, colour = aggregation method: 3 x 6 names give
  // 18 distinct marks, and each method name appears once in the legend.
  const Demo& demo = TheDemo();
  ReportInputs in = InputsFor(demo.job, &demo.config);
  const int num_regions = demo.job.survey.num_regions();
  const NodeResult& root = demo.job.result.nodes.front();
  ReportSensitivity sensitivity;
  const std::vector<std::string> elementary = {"cpd", "robust-cpd", "jevons-geks"};
  const std::vector<std::string> aggregation = {"geks-fisher", "geks-tornqvist", "weighted-cpd",
                                                "spanning-tree", "geary-khamis",
                                                "ikle-dikhanov-balk"};
  for (const std::string& e : elementary) {
    for (const std::string& a : aggregation) {
      sensitivity.method_names.push_back(e + "/" + a);
      std::vector<double> parity(num_regions);
      for (int r = 0; r < num_regions; ++r) parity[r] = root.parity(r) * 1.001;
      sensitivity.method_parity.push_back(parity);
    }
  }
  in.sensitivity = &sensitivity;
  const std::string html = ReportHtml(in);
  const std::vector<std::string> marks = FirstRowMarks(html);
  ASSERT_EQ(marks.size(), 18u);
  EXPECT_EQ(std::set<std::string>(marks.begin(), marks.end()).size(), 18u);
  for (const std::string& name : elementary) {
    EXPECT_EQ(CountOf(html, "</svg> " + name + "</span>"), 1u) << name;
  }
  for (const std::string& name : aggregation) {
    EXPECT_EQ(CountOf(html, "</svg> " + name + "</span>"), 1u) << name;
  }
}

TEST(ReportHtml, ShowsAnEmptyOutlierListAsNone) {
  const Demo& demo = TheDemo();
  ReportInputs in = InputsFor(demo.job, &demo.config);
  const std::vector<ReportOutlier> none;
  in.outliers = &none;
  const std::string html = ReportHtml(in);
  EXPECT_NE(html.find("No cell's standardised residual exceeds 3.5"), std::string::npos);
}

TEST(ReportHtml, ShowsHostileRegionAndHeadingNamesAsText) {
  // The demo survey with its first region and first heading renamed: codes
  // are only interned text, so any bytes may reach the report.
  const Demo& demo = TheDemo();
  ComputeJobSummary job = demo.job;
  std::vector<std::string> codes = job.survey.regions.Codes();
  codes[0] = "<script>alert(1)</script>";
  job.survey.regions = CodeTable::FromCodes(codes);
  job.survey.region_name[0] = "<img src=x onerror=alert(2)>";
  job.survey.heading_codes[0] = "\"><svg onload=alert(3)>";
  job.warnings.push_back({"input", "", "", "region <script>alert(4)</script> has no rents"});
  const std::string html = ReportHtml(InputsFor(job, &demo.config));
  EXPECT_EQ(CountOf(html, "<script"), 1u);
  EXPECT_EQ(html.find("<img"), std::string::npos);
  EXPECT_EQ(html.find("<svg onload"), std::string::npos);
  EXPECT_NE(html.find("&lt;script&gt;alert(1)&lt;/script&gt;"), std::string::npos);
  EXPECT_NE(html.find("&lt;img src=x onerror=alert(2)&gt;"), std::string::npos);
  EXPECT_NE(html.find("&lt;script&gt;alert(4)&lt;/script&gt;"), std::string::npos);
}

TEST(ReportHtml, GivesAShortPageWithoutResults) {
  const std::string html = ReportHtml(ReportInputs());
  EXPECT_NE(html.find("No parities were computed"), std::string::npos);
  EXPECT_NE(html.find("</html>"), std::string::npos);
}

TEST(ReportHtml, StaysSmallAndThinsItsGridsAtAThousandRegions) {
  synthetic::SyntheticOptions options;
  options.num_regions = 1000;
  options.num_headings = 12;
  options.items_per_heading = 5;
  options.num_groups = 3;
  const std::string folder = MakeTempDir("report_thousand");
  std::string error;
  ASSERT_TRUE(synthetic::WriteSurvey(synthetic::Generate(options), folder, &error)) << error;
  RunConfig config;
  ASSERT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  const ComputeJobSummary job = RunJob(folder + "/config.yaml", folder + "/out");
  const std::string html = ReportHtml(InputsFor(job, &config));
  EXPECT_LT(html.size(), 5u << 20);                        // < 5 MB (the design limit)
  EXPECT_EQ(CountOf(html, "class=\"pl-bar compact\""), 1000u);  // still one bar per region
  EXPECT_EQ(CountOf(SvgById(html, "matrix-grid"), "<rect class=\"cell\""),
            static_cast<size_t>(kReportMaxGridRegions * kReportMaxGridRegions));
  EXPECT_EQ(CountOf(SvgById(html, "coverage-grid"), "<rect class=\"cell"), 12u * (kReportMaxGridRegions + 1));
  EXPECT_EQ(CountOf(SvgById(html, "aggregate-grid"), "<rect class=\"cell"),
            static_cast<size_t>(kReportMaxGridRegions) * 4);  // root + 3 groups
  EXPECT_NE(html.find("60 of 1,000 regions shown"), std::string::npos);
}

}  // namespace
}  // namespace paritas
