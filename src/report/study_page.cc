// StudyPage: the subjects table, the pool-ready stacks, the group results and how to
// read the report.
#include <cmath>
#include <filesystem>

#include "boldsum/io.h"
#include "report/html_page.h"
#include "report/map_figures.h"
#include "report/report_pages.h"
#include "report/residual_whiteness.h"
#include "report/svg_plots.h"
#include "stats/robust_scores.h"
#include "study/gather.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

constexpr double kGroupZThreshold = 2.3;  // display only, as on the subject pages

std::string Percent(double share) {
  return std::isfinite(share) ? FixedText(100.0 * share, 1) + "%" : "n/a";
}

std::string FileSize(uintmax_t bytes) {
  if (bytes < 10 * 1024) return std::to_string(bytes) + " B";
  if (bytes < 10 * 1024 * 1024) return std::to_string(bytes / 1024) + " KiB";
  return std::to_string(bytes / (1024 * 1024)) + " MiB";
}

std::string SubjectsSection(const std::vector<SubjectRow>& rows) {
  HtmlTable table;
  table.header = {"subject",
                  "status",
                  "residual dof per run",
                  "mean AR(1)",
                  "residual whiteness: share failing",
                  "censored volumes",
                  "warnings",
                  "outlier"};
  table.numeric = {false, false, true, true, true, true, true, false};
  int flagged = 0;
  for (const SubjectRow& row : rows) {
    const std::string name =
        row.has_page ? "<a href=\"" + Html(SubjectPageName(row.id)) + "\">" + Html(row.id) + "</a>"
                     : Html(row.id);
    std::string kind = "ok";
    if (row.status.state == SubjectStatus::State::kMissing)
      kind = "bad";
    else if (row.status.state != SubjectStatus::State::kUpToDate)
      kind = "warn";
    std::string dof;
    for (size_t r = 0; r < row.run_dof.size(); ++r)
      dof += (r ? " + " : "") + std::to_string(row.run_dof[r]);
    std::string outlier = "n/a";
    if (std::isfinite(row.outlier_score)) {
      const bool far = row.outlier_score > kOutlierModifiedZ;
      flagged += far;
      outlier = (far ? Badge("outlier", "bad") + " " : std::string()) +
                "M = " + FixedText(row.outlier_score, 1) + " (" + Html(row.outlier_contrast) + ")";
    }
    table.rows.push_back({name, Badge(row.status.reason, kind), dof.empty() ? "n/a" : dof,
                          FixedText(row.mean_ar1, 3), Percent(row.whiteness_share),
                          row.has_page ? std::to_string(row.censored) : "n/a",
                          std::to_string(row.warnings), outlier});
  }
  std::string html = Heading(2, "Subjects", "subjects") + table.ToHtml();
  html += Paragraph(
      std::to_string(flagged) +
          " subject(s) flagged as outliers. For every t contrast, each "
          "subject's z map is compared with the mean of the other subjects' maps (root mean "
          "square difference over the voxels or regions every subject has); the distances are "
          "turned into modified z-scores M = 0.6745 (d - median) / MAD (Iglewicz &amp; Hoaglin "
          "1993), and a subject whose largest M exceeds 3.5 is flagged (common practice). The "
          "column shows the largest M and its contrast. A flag asks for a look at the subject's "
          "page, not for exclusion.",
      "note");
  return html;
}

std::string PoolReadySection(const std::string& root) {
  std::string html = Heading(2, "Pool-ready stacks", "pool-ready");
  const fs::path folder = fs::path(root) / kPoolReadyFolder;
  if (!fs::is_directory(folder)) {
    return html + Paragraph(
                      "Not written yet: <code>boldsum gather</code> (or a <code>fit</code> "
                      "of every subject) writes " +
                          Html(folder.string()) + ".",
                      "note");
  }
  HtmlTable files;
  files.caption = "Files in " + folder.string();
  files.header = {"file", "size", "contents"};
  files.numeric = {false, true, false};
  std::vector<fs::path> entries;
  for (const auto& entry : fs::directory_iterator(folder)) {
    if (entry.is_regular_file() && entry.path().filename().string()[0] != '.') {
      entries.push_back(entry.path());
    }
  }
  std::sort(entries.begin(), entries.end());
  for (const fs::path& path : entries) {
    std::string contents;
    const std::string name = path.filename().string();
    if (name.size() > 7 && name.substr(name.size() - 7) == ".nii.gz") {
      const ImageGeometry g = ReadImageGeometry(path.string());
      contents = std::to_string(g.dims[0]) + " x " + std::to_string(g.dims[1]) + " x " +
                 std::to_string(g.dims[2]) +
                 (g.n_volumes > 1 ? " x " + std::to_string(g.n_volumes) + " subjects" : "");
    } else if (name.size() > 4 && name.substr(name.size() - 4) == ".tsv") {
      contents = std::to_string(ReadTable(path.string()).rows.size()) + " rows";
    }
    files.rows.push_back({Html(name), FileSize(fs::file_size(path)), Html(contents)});
  }
  html += files.ToHtml();
  const fs::path subjects = folder / "subjects.tsv";
  if (fs::exists(subjects)) {
    const Table table = ReadTable(subjects.string());
    HtmlTable shown;
    shown.caption = "subjects.tsv (row i describes volume i of every stack)";
    for (const std::string& h : table.header) shown.header.push_back(Html(h));
    for (const auto& row : table.rows) {
      std::vector<std::string> cells;
      for (const std::string& cell : row) cells.push_back(Html(cell));
      shown.rows.push_back(cells);
    }
    html += shown.ToHtml();
  }
  return html;
}

std::vector<float> ReadMask(const std::string& path, const ImageGeometry& grid) {
  if (!fs::exists(path)) return {};
  ImageGeometry g;
  std::vector<float> mask = ReadVolume(path, &g);
  return g.SameSpace(grid) ? mask : std::vector<float>{};
}

std::string GroupImages(const GroupResults& group) {
  std::string html;
  for (const std::string& contrast : group.spec.first_level_contrasts) {
    for (const GroupContrast& g : group.spec.contrasts) {
      const fs::path z_path = fs::path(group.spec.output_dir) / contrast / (g.name + ".z.nii.gz");
      html += Heading(3, contrast + ": " + g.name + (g.is_f ? " (F)" : " (t)"));
      if (!fs::exists(z_path)) {
        html += Paragraph("No map at " + Html(z_path.string()) + ".", "note");
        continue;
      }
      ImageFrame frame;
      const std::vector<float> z = ReadVolume(z_path.string(), &frame.geometry);
      frame.extent.assign(z.size(), 0);
      const std::vector<float> mask =
          ReadMask((fs::path(group.spec.input.folder) / "mask.nii.gz").string(), frame.geometry);
      for (size_t i = 0; i < z.size(); ++i) {
        frame.extent[i] = mask.empty() ? std::isfinite(z[i]) : mask[i] != 0.0f;
      }
      if (!group.background.empty() && group.background_geometry.SameSpace(frame.geometry)) {
        frame.background = group.background;
      } else {
        frame.background = mask;
      }
      frame.ScaleBackground();
      html += MapFigure(frame, z, ZLimit(z), kGroupZThreshold, g.is_f,
                        "group z: " + contrast + ", " + g.name, "z",
                        "Group z over the mean of the subjects' mean images, shown where |z| "
                        "&gt;= " +
                            FixedText(kGroupZThreshold, 1) + " (a display threshold).");
      std::vector<float> estimate;
      if (!g.is_f) {
        ImageGeometry ignored;
        estimate = ReadVolume(
            (fs::path(group.spec.output_dir) / contrast / (g.name + ".estimate.nii.gz")).string(),
            &ignored);
      }
      html += PeakTable(frame.geometry, z, !g.is_f, g.is_f ? nullptr : &estimate);
    }
  }
  return html;
}

std::string GroupRegions(const GroupResults& group) {
  const std::string path = (fs::path(group.spec.output_dir) / "regions.tsv").string();
  const Table table = ReadTable(path);
  const int c = table.ColumnIndex("contrast"), g = table.ColumnIndex("group_contrast"),
            region = table.ColumnIndex("region"), n = table.ColumnIndex("n"),
            estimate = table.ColumnIndex("estimate"), z = table.ColumnIndex("z");
  if (c < 0 || g < 0 || region < 0 || n < 0 || estimate < 0 || z < 0) {
    throw Error(path + ": expected the columns contrast, group_contrast, region, n, estimate, z");
  }
  std::string html;
  std::vector<std::pair<std::string, std::string>> keys;
  for (const auto& row : table.rows) {
    const std::pair<std::string, std::string> key = {row[static_cast<size_t>(c)],
                                                     row[static_cast<size_t>(g)]};
    if (std::find(keys.begin(), keys.end(), key) == keys.end()) keys.push_back(key);
  }
  for (const auto& [contrast, group_contrast] : keys) {
    HtmlTable shown;
    shown.header = {"region", "n", "estimate", "z"};
    shown.numeric = {false, true, true, true};
    std::vector<std::string> labels;
    std::vector<double> zs;
    double limit = 4;
    for (const auto& row : table.rows) {
      if (row[static_cast<size_t>(c)] != contrast || row[static_cast<size_t>(g)] != group_contrast)
        continue;
      double value = std::nan("");
      ParseNumber(row[static_cast<size_t>(z)], &value);
      labels.push_back(row[static_cast<size_t>(region)]);
      zs.push_back(value);
      if (std::isfinite(value)) limit = std::max(limit, std::ceil(std::abs(value)));
      double estimate_value = std::nan("");
      ParseNumber(row[static_cast<size_t>(estimate)], &estimate_value);
      shown.rows.push_back({Html(labels.back()), Html(row[static_cast<size_t>(n)]),
                            Html(LabelNumber(estimate_value, 4)), Html(LabelNumber(value, 4))});
    }
    html += Heading(3, contrast + ": " + group_contrast);
    html += "<div class=\"row\">\n" +
            Figure(BarChartSvg(labels, zs, limit, kGroupZThreshold,
                               "group z: " + contrast + ", " + group_contrast, "z"),
                   "Group z per region; dashed lines at |z| = " + FixedText(kGroupZThreshold, 1) +
                       ".") +
            shown.ToHtml() + "</div>\n";
  }
  return html;
}

std::string GroupSection(const GroupResults& group) {
  std::string html = Heading(2, "Group results", "group");
  if (!group.requested) {
    return html + Paragraph(
                      "Not shown: give the group config with <code>boldsum report CONFIG "
                      "--group GROUP.yaml</code> after <code>boldsum pool GROUP.yaml</code>.",
                      "note");
  }
  html += Paragraph("From " + Html(group.spec.config_path) + " (method " +
                    PoolMethodName(group.spec.method) + "), results in " +
                    Html(group.spec.output_dir) + ".");
  if (!group.complete) {
    return html +
           Paragraph("<code>boldsum pool</code> has not finished there (no summary.json).", "note");
  }
  return html + (group.spec.input.kind == PoolInputKind::kImages ? GroupImages(group)
                                                                 : GroupRegions(group));
}

std::string AboutSection() {
  std::string html = Heading(2, "How to read this report", "about");
  html += Paragraph(
      "<strong>Residual whiteness.</strong> For every voxel (or region) and run, the fitted "
      "model's residuals are prewhitened with that voxel's AR(1) coefficient (the Prais-Winsten "
      "transform the fit uses) and tested for autocorrelation at lags 1-" +
      std::to_string(kWhitenessLags) +
      " with the Ljung-Box Q (Ljung &amp; Box 1978, Biometrika 65:297), referred to chi-square "
      "with 4 degrees of freedom (5 lags less the one AR coefficient estimated; 5 without a "
      "noise model). With white innovations about 5% of series fail at p &lt; 0.05 by chance, "
      "and a few points more is usual because the fitted regressors (drift above all) leave "
      "slight autocorrelation in any residuals. A share well above that, or failures in "
      "clusters, means the noise is not AR(1) there and the first-level variances are too "
      "small.");
  html += Paragraph(
      "<strong>Colours.</strong> Signed values use one diverging scale of boldsum's own design: "
      "blue for negative, near-white at zero, orange-red for positive; lightness falls steadily "
      "from the middle to either end, and blue and orange stay distinct for red-green colour-"
      "blind readers. Slice pictures show the mean image in grey beneath. z maps are drawn "
      "where |z| &gt;= 2.3, a display threshold that is not a statistical test.");
  html += Figure(ColourBarSvg(1.0, 0.0, false, "the diverging scale"), "The diverging scale.");
  return html;
}

}  // namespace

std::string StudyPage(const StudySpec& spec, const std::string& root,
                      const std::vector<SubjectRow>& rows, const GroupResults& group) {
  std::string html =
      PageStart("Study report", "boldsum report for " + spec.config_path + "; results in " + root);
  html +=
      "<nav><a href=\"#subjects\">subjects</a> <a href=\"#pool-ready\">pool-ready stacks</a> "
      "<a href=\"#group\">group results</a> <a href=\"#about\">how to read</a></nav>\n";
  html += SubjectsSection(rows);
  html += PoolReadySection(root);
  html += GroupSection(group);
  html += AboutSection();
  return html + PageEnd();
}

}  // namespace boldsum
