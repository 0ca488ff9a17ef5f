// SubjectPage: design, warnings, temporal noise, residual whiteness and contrast maps of
// one subject.
#include <algorithm>
#include <cmath>
#include <filesystem>

#include "boldsum/design.h"
#include "boldsum/io.h"
#include "report/colour_scale.h"
#include "report/html_page.h"
#include "report/map_figures.h"
#include "report/report_pages.h"
#include "report/svg_plots.h"
#include "report/world_space.h"
#include "study/check_study.h"

namespace fs = std::filesystem;

namespace boldsum {
namespace {

constexpr double kZDisplayThreshold = 2.3;  // |z| shown on the maps (display only)
constexpr double kAr1Limit = 0.8;           // AR(1) colours saturate here
constexpr double kWhitenessMapLimit = 4.0;  // -log10 p colours saturate here (p = 1e-4)

std::string Percent(double share) {
  return std::isfinite(share) ? FixedText(100.0 * share, 1) + "%" : "n/a";
}

std::string RunName(const RunPlan& run) { return "run " + std::to_string(run.index); }

// Per fitted voxel values onto the grid; NaN elsewhere and where `keep` is 0.
std::vector<float> ToGrid(const FitRecord& record, int64_t n_grid, const std::vector<float>& values,
                          const std::vector<unsigned char>& keep) {
  std::vector<float> grid(static_cast<size_t>(n_grid), std::nanf(""));
  for (size_t v = 0; v < record.voxels.size(); ++v) {
    if (keep[v]) grid[static_cast<size_t>(record.voxels[v])] = values[v];
  }
  return grid;
}

std::vector<unsigned char> ValidInAllRuns(const FitRecord& record) {
  std::vector<unsigned char> valid(record.runs.front().valid.size(), 1);
  for (const RunFit& run : record.runs) {
    for (size_t v = 0; v < valid.size(); ++v) valid[v] &= run.valid[v];
  }
  return valid;
}

double MeanRho(const RunFit& fit) {
  double sum = 0;
  int n = 0;
  for (Eigen::Index v = 0; v < fit.rho.size(); ++v) {
    if (fit.valid[static_cast<size_t>(v)]) {
      sum += fit.rho(v);
      ++n;
    }
  }
  return n ? sum / n : std::nan("");
}

int CensoredVolumes(const RunPlan& run) {
  int n = 0;
  for (const DesignColumn& column : run.design.columns) n += column.kind == ColumnKind::kCensor;
  return n;
}

// The subject's grid, its valid voxels and the mean image (or, without residual
// diagnostics, the first volume of its first run).
ImageFrame MakeFrame(const SubjectInputs& in) {
  ImageFrame frame;
  frame.geometry = in.plan.runs.front().geometry;
  frame.geometry.n_volumes = 1;
  frame.extent.assign(static_cast<size_t>(frame.geometry.n_voxels()), 0);
  const std::vector<unsigned char> valid = ValidInAllRuns(in.record);
  for (size_t v = 0; v < in.record.voxels.size(); ++v) {
    if (valid[v]) frame.extent[static_cast<size_t>(in.record.voxels[v])] = 1;
  }
  if (in.residuals && !in.residuals->mean_image.empty()) {
    frame.background = in.residuals->mean_image;
  } else {
    ImageGeometry ignored;
    frame.background = ReadVolume(in.plan.runs.front().spec->data_path, &ignored);
  }
  frame.ScaleBackground();
  return frame;
}

// ---- design ------------------------------------------------------------------------

std::string DesignSection(const SubjectInputs& in) {
  std::string html = Heading(2, "Design", "design");
  if (!in.has_plan) {
    return html +
           Paragraph("The designs could not be built from the config; see Warnings.", "note");
  }
  const StudySpec& spec = *in.spec;
  for (const RunPlan& run : in.plan.runs) {
    const DesignReport report = DescribeDesign(run.design, spec.model, spec.contrasts);
    html += Heading(3, "Design of " + RunName(run));
    html += Paragraph(
        std::to_string(run.n_volumes) + " volumes, " + std::to_string(run.design.n_columns()) +
        " columns, rank " + std::to_string(report.rank) + ", condition number " +
        Html(LabelNumber(report.condition_number, 4)) + " (columns scaled to unit length), " +
        std::to_string(CensoredVolumes(run)) + " censored volume(s).");
    html += "<div class=\"row\">\n";
    html += Figure(DesignToSvg(run.design, in.subject->id + " " + RunName(run)),
                   "The design matrix: one column per regressor, time downwards; each column "
                   "scaled to its own range (black low, white high).");
    html += Figure(MatrixSvg(ColumnCorrelations(run.design), run.design.names(), 1.0,
                             "Correlations between design columns"),
                   "Pearson correlation of every pair of columns on the diverging scale "
                   "(-1 blue, 0 white, +1 orange); constant columns are grey.");
    html += "</div>\n";
    html += Figure(RegressorsSvg(run.design, spec.model, run.spec->events,
                                 "Condition regressors and their events, " + RunName(run)),
                   "Each condition's regressor (the event boxcars convolved with the HRF, as "
                   "in the design) over the run, with its events shaded.");
    HtmlTable conditions;
    conditions.caption = "Conditions";
    conditions.header = {"condition", "largest |correlation|", "with", "variance inflation"};
    conditions.numeric = {false, true, false, true};
    for (const auto& c : report.conditions) {
      conditions.rows.push_back({Html(c.condition), FixedText(c.max_abs_correlation, 3),
                                 Html(c.most_correlated_with),
                                 Html(LabelNumber(c.variance_inflation, 4))});
    }
    HtmlTable contrasts;
    contrasts.caption = "Contrast efficiency 1 / trace(C (X'X)^-1 C')";
    contrasts.header = {"contrast", "efficiency"};
    contrasts.numeric = {false, true};
    for (const auto& c : report.contrasts) {
      contrasts.rows.push_back({Html(c.contrast), c.estimable ? Html(LabelNumber(c.efficiency, 4))
                                                              : "not estimable in this run"});
    }
    html += "<div class=\"row\">\n" + conditions.ToHtml() + contrasts.ToHtml() + "</div>\n";
  }
  return html;
}

// ---- warnings ----------------------------------------------------------------------

std::vector<std::string> CollectWarnings(const SubjectInputs& in) {
  std::vector<std::string> warnings;
  if (in.status.state != SubjectStatus::State::kUpToDate) warnings.push_back(in.status.reason);
  for (const Diagnostic& d : in.plan_problems.all()) warnings.push_back(d.ToString());
  if (in.has_plan) {
    for (const RunPlan& run : in.plan.runs) {
      for (const Diagnostic& d : run.warnings.all()) warnings.push_back(d.ToString());
      const DesignReport report = DescribeDesign(run.design, in.spec->model, in.spec->contrasts);
      for (const std::string& problem : UsabilityProblems(run, report)) {
        warnings.push_back(RunName(run) + ": unusable: " + problem);
      }
    }
  }
  if (in.has_results) {
    for (const std::string& w : in.recorded.warnings) warnings.push_back(w);
  }
  if (!in.residual_note.empty()) warnings.push_back(in.residual_note);
  return warnings;
}

std::string WarningsSection(const std::vector<std::string>& warnings) {
  std::string html = Heading(2, "Warnings", "warnings");
  if (warnings.empty())
    return html + Paragraph("None: <code>boldsum check</code> and the fit raised no warnings.");
  html += "<ul class=\"warnings\">\n";
  for (const std::string& w : warnings) html += "<li>" + Html(w) + "</li>\n";
  return html + "</ul>\n";
}

// ---- temporal noise ----------------------------------------------------------------

std::vector<double> ValidValues(const Eigen::VectorXd& values,
                                const std::vector<unsigned char>& valid) {
  std::vector<double> out;
  for (Eigen::Index v = 0; v < values.size(); ++v) {
    if (valid[static_cast<size_t>(v)]) out.push_back(values(v));
  }
  return out;
}

std::string NoiseSection(const SubjectInputs& in, const ImageFrame* frame) {
  std::string html = Heading(2, "Temporal noise", "noise");
  const bool images = frame != nullptr;
  html += Paragraph("The AR(1) coefficient fitted in every " +
                    std::string(images ? "voxel" : "region") +
                    " (bias-corrected, Worsley et al. 2002) and, after prewhitening with it, "
                    "whether the residuals are white.");
  for (size_t r = 0; r < in.plan.runs.size(); ++r) {
    const RunPlan& run = in.plan.runs[r];
    const RunFit& fit = in.record.runs[r];
    html += Heading(3, "AR(1) coefficient, " + RunName(run));
    const std::vector<double> rho = ValidValues(fit.rho, fit.valid);
    double lo = -0.2, hi = 0.8;
    for (double v : rho) {
      lo = std::min(lo, std::floor(v * 10) / 10);
      hi = std::max(hi, std::ceil(v * 10) / 10);
    }
    html += "<div class=\"row\">\n";
    html +=
        Figure(HistogramSvg(rho, lo, hi, 40, "AR(1) coefficients, " + RunName(run), "rho"),
               "Distribution over the " + std::to_string(rho.size()) + " valid " +
                   (images ? "voxels" : "regions") + "; mean " + FixedText(MeanRho(fit), 3) + ".");
    if (images) {
      std::vector<float> values(static_cast<size_t>(fit.rho.size()));
      for (Eigen::Index v = 0; v < fit.rho.size(); ++v)
        values[static_cast<size_t>(v)] = static_cast<float>(fit.rho(v));
      html += MapFigure(*frame, ToGrid(in.record, frame->geometry.n_voxels(), values, fit.valid),
                        kAr1Limit, 0.0, false, "AR(1) coefficient, " + RunName(run), "rho",
                        "AR(1) coefficient over the mean image.");
    } else {
      std::vector<double> values;
      for (Eigen::Index v = 0; v < fit.rho.size(); ++v) {
        values.push_back(fit.valid[static_cast<size_t>(v)] ? fit.rho(v) : std::nan(""));
      }
      html += Figure(BarChartSvg(in.recorded.regions, values, kAr1Limit, 0.0,
                                 "AR(1) coefficient per region, " + RunName(run), "rho"),
                     "The AR(1) coefficient of each region.");
    }
    html += "</div>\n";
  }

  html += Heading(3, "Residual whiteness");
  if (!in.residuals) {
    return html + Paragraph("Not measured: " + Html(in.residual_note), "note");
  }
  const ResidualDiagnostics& res = *in.residuals;
  const int df = kWhitenessLags - WhitenessModelDf(in.spec->model.noise);
  html += Paragraph(
      "<strong>" + Percent(res.share()) + "</strong> of " +
      std::string(images ? "voxel" : "region") + " series (" + std::to_string(res.flagged) +
      " of " + std::to_string(res.tested) + ", all runs) still show autocorrelation at lags 1-" +
      std::to_string(kWhitenessLags) +
      " after prewhitening: Ljung-Box Q (Ljung &amp; Box 1978) of the prewhitened residuals, "
      "p &lt; 0.05 against chi-square with " +
      std::to_string(df) +
      " degrees of freedom. With white innovations about 5% fail by chance and a few points "
      "more is usual (the fitted regressors leave slight autocorrelation); a much larger "
      "share means AR(1) did not capture the noise and the variances are too small.");
  HtmlTable table;
  table.header = {"run", "tested", "p &lt; 0.05", "share"};
  table.numeric = {false, true, true, true};
  for (size_t r = 0; r < res.runs.size(); ++r) {
    const RunWhiteness& w = res.runs[r];
    table.rows.push_back({Html(RunName(in.plan.runs[r])), std::to_string(w.tested),
                          std::to_string(w.flagged),
                          Percent(w.tested ? double(w.flagged) / w.tested : std::nan(""))});
  }
  html += table.ToHtml();
  for (size_t r = 0; r < res.runs.size(); ++r) {
    const RunWhiteness& w = res.runs[r];
    std::vector<float> minus_log_p(w.p.size());
    for (size_t v = 0; v < w.p.size(); ++v) {
      minus_log_p[v] =
          std::isfinite(w.p[v]) ? -std::log10(std::max(w.p[v], 1e-30f)) : std::nanf("");
    }
    if (images) {
      std::vector<unsigned char> all(w.p.size(), 1);
      html +=
          MapFigure(*frame, ToGrid(in.record, frame->geometry.n_voxels(), minus_log_p, all),
                    kWhitenessMapLimit, -std::log10(kWhitenessAlpha), true,
                    "Residual autocorrelation, " + RunName(in.plan.runs[r]), "-log10 p (Ljung-Box)",
                    "Voxels whose prewhitened residuals fail the Ljung-Box test (p &lt; 0.05), "
                    "coloured by -log10 p.");
    } else {
      HtmlTable regions;
      regions.caption = "Ljung-Box test per region, " + RunName(in.plan.runs[r]);
      regions.header = {"region", "Q", "p"};
      regions.numeric = {false, true, true};
      std::vector<double> bars;
      for (size_t v = 0; v < w.p.size(); ++v) {
        regions.rows.push_back({Html(in.recorded.regions[v]), Html(LabelNumber(w.q[v], 4)),
                                Html(LabelNumber(w.p[v], 3))});
        bars.push_back(minus_log_p[v]);
      }
      html += "<div class=\"row\">\n" + regions.ToHtml() +
              Figure(BarChartSvg(in.recorded.regions, bars, kWhitenessMapLimit,
                                 -std::log10(kWhitenessAlpha),
                                 "Residual autocorrelation, " + RunName(in.plan.runs[r]),
                                 "-log10 p (Ljung-Box)"),
                     "Bars beyond the dashed line (p = 0.05) fail the test.") +
              "</div>\n";
    }
  }
  return html;
}

// ---- contrasts ---------------------------------------------------------------------

std::string ImageContrast(const SubjectInputs& in, const ImageFrame& frame,
                          const ContrastSpec& contrast) {
  const std::string z_path = (fs::path(in.folder) / (contrast.name + ".z.nii.gz")).string();
  if (!fs::exists(z_path)) return Paragraph("No z map (" + Html(z_path) + ").", "note");
  ImageGeometry geometry;
  const std::vector<float> z = ReadVolume(z_path, &geometry);
  std::vector<float> estimate;
  if (!contrast.is_f) {
    estimate = ReadVolume((fs::path(in.folder) / (contrast.name + ".estimate.nii.gz")).string(),
                          &geometry);
  }
  const double limit = ZLimit(z);
  std::string html =
      MapFigure(frame, z, limit, kZDisplayThreshold, contrast.is_f,
                "z of " + contrast.name + " (" + (contrast.is_f ? "F" : "t") + " contrast)", "z",
                "z over the mean image, shown where |z| &gt;= " + FixedText(kZDisplayThreshold, 1) +
                    " (a display threshold, not a test).");
  html += PeakTable(geometry, z, !contrast.is_f, contrast.is_f ? nullptr : &estimate);
  return html;
}

std::string RegionContrast(const SubjectInputs& in, const ContrastSpec& contrast) {
  const std::string path =
      (fs::path(in.folder) / (contrast.is_f ? "f_tests.tsv" : "summary.tsv")).string();
  const Table table = ReadTable(path);
  const int c_contrast = table.ColumnIndex("contrast"), c_region = table.ColumnIndex("region"),
            c_z = table.ColumnIndex("z");
  const int c_value = table.ColumnIndex(contrast.is_f ? "f" : "estimate");
  if (c_contrast < 0 || c_region < 0 || c_z < 0 || c_value < 0) {
    throw Error(path + ": expected the columns contrast, region, " +
                std::string(contrast.is_f ? "f" : "estimate") + " and z");
  }
  std::vector<std::string> labels;
  std::vector<double> zs;
  HtmlTable rows;
  rows.header = {"region", contrast.is_f ? "F" : "estimate", "z"};
  rows.numeric = {false, true, true};
  for (const auto& row : table.rows) {
    if (row[static_cast<size_t>(c_contrast)] != contrast.name) continue;
    double z = std::nan("");
    ParseNumber(row[static_cast<size_t>(c_z)], &z);
    labels.push_back(row[static_cast<size_t>(c_region)]);
    zs.push_back(z);
    double value = std::nan("");
    ParseNumber(row[static_cast<size_t>(c_value)], &value);
    rows.rows.push_back(
        {Html(labels.back()), Html(LabelNumber(value, 4)), Html(LabelNumber(z, 4))});
  }
  if (labels.empty()) return Paragraph("No results for this contrast.", "note");
  double limit = 4;
  for (double z : zs) {
    if (std::isfinite(z)) limit = std::max(limit, std::ceil(std::abs(z)));
  }
  return "<div class=\"row\">\n" +
         Figure(BarChartSvg(labels, zs, limit, kZDisplayThreshold, "z of " + contrast.name, "z"),
                "z per region; dashed lines at |z| = " + FixedText(kZDisplayThreshold, 1) + ".") +
         rows.ToHtml() + "</div>\n";
}

std::string ContrastsSection(const SubjectInputs& in, const ImageFrame* frame) {
  std::string html = Heading(2, "Contrasts", "contrasts");
  for (const ContrastSpec& contrast : in.spec->contrasts) {
    html += Heading(3, "Contrast " + contrast.name);
    const RecordedContrast* recorded = in.recorded.Find(contrast.name);
    if (!recorded) {
      html += Paragraph(
          "Not in the saved results (added after the fit?): run <code>boldsum fit</code>.", "note");
      continue;
    }
    if (!recorded->estimable) {
      html += Paragraph("Not estimable from any run of this subject.", "note");
      continue;
    }
    html += Paragraph(std::string(contrast.is_f ? "F" : "t") + " contrast, " +
                      Html(recorded->dof_text) + " residual degrees of freedom.");
    html += frame ? ImageContrast(in, *frame, contrast) : RegionContrast(in, contrast);
  }
  return html;
}

std::string SummaryTable(const SubjectInputs& in, const SubjectRow& row) {
  HtmlTable table;
  table.header = {"", ""};
  const auto add = [&](const std::string& name, const std::string& value) {
    table.rows.push_back({Html(name), value});
  };
  const std::string kind = in.status.state == SubjectStatus::State::kUpToDate ? "ok" : "warn";
  add("status", Badge(in.status.reason, kind));
  add("data", in.has_plan && in.plan.kind == DataKind::kImage ? "images" : "region tables");
  std::string dof;
  for (size_t r = 0; r < row.run_dof.size(); ++r)
    dof += (r ? " + " : "") + std::to_string(row.run_dof[r]);
  add("runs", std::to_string(in.record.runs.size()));
  add("residual dof per run", dof);
  if (in.has_results && in.has_plan && in.plan.kind == DataKind::kImage) {
    const std::vector<unsigned char> valid = ValidInAllRuns(in.record);
    add("voxels fitted / valid in every run",
        std::to_string(in.record.voxels.size()) + " / " +
            std::to_string(std::count(valid.begin(), valid.end(), 1)));
  }
  add("mean AR(1)", FixedText(row.mean_ar1, 3));
  add("residual whiteness: share failing", Percent(row.whiteness_share));
  add("censored volumes", std::to_string(row.censored));
  add("warnings", std::to_string(row.warnings));
  return table.ToHtml();
}

}  // namespace

std::string SubjectPageName(const std::string& id) { return "subject-" + id + ".html"; }

std::string SubjectPage(const SubjectInputs& in, SubjectRow* row) {
  row->id = in.subject->id;
  row->status = in.status;
  row->has_page = true;
  row->images = !in.has_plan || in.plan.kind == DataKind::kImage;
  row->mean_ar1 = std::nan("");
  row->whiteness_share = in.residuals ? in.residuals->share() : std::nan("");
  const std::vector<std::string> warnings = CollectWarnings(in);
  row->warnings = static_cast<int>(warnings.size());
  if (in.has_results) {
    double sum = 0;
    int n = 0;
    for (const RunFit& fit : in.record.runs) {
      row->run_dof.push_back(fit.dof);
      const double mean = MeanRho(fit);
      if (std::isfinite(mean)) {
        sum += mean;
        ++n;
      }
    }
    if (n) row->mean_ar1 = sum / n;
  }
  if (in.has_plan) {
    for (const RunPlan& run : in.plan.runs) row->censored += CensoredVolumes(run);
  }

  std::string html =
      PageStart("Subject " + in.subject->id, "boldsum report for " + in.spec->config_path);
  html +=
      "<nav><a href=\"index.html\">&larr; study</a> <a href=\"#summary\">summary</a> "
      "<a href=\"#design\">design</a> <a href=\"#warnings\">warnings</a> "
      "<a href=\"#noise\">temporal noise</a> <a href=\"#contrasts\">contrasts</a></nav>\n";
  html += Heading(2, "Summary", "summary") + SummaryTable(in, *row);
  html += DesignSection(in);
  html += WarningsSection(warnings);
  bool consistent = in.has_results && in.has_plan && in.record.runs.size() == in.plan.runs.size();
  for (size_t r = 0; consistent && r < in.plan.runs.size(); ++r) {
    consistent = in.record.runs[r].beta.rows() == in.plan.runs[r].design.n_columns();
  }
  if (consistent) {
    if (in.plan.kind == DataKind::kImage) {
      const ImageFrame frame = MakeFrame(in);
      html += NoiseSection(in, &frame);
      html += ContrastsSection(in, &frame);
    } else {
      html += NoiseSection(in, nullptr);
      html += ContrastsSection(in, nullptr);
    }
  } else {
    html +=
        Heading(2, "Temporal noise", "noise") +
        Paragraph("No fit results that match the config; run <code>boldsum fit</code>.", "note");
    html +=
        Heading(2, "Contrasts", "contrasts") +
        Paragraph("No fit results that match the config; run <code>boldsum fit</code>.", "note");
  }
  return html + PageEnd();
}

}  // namespace boldsum
