// Properties over generated configs: a random valid study written as YAML text loads
// back into the same spec, and any one-character corruption of any key is reported at
// that key's line.
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <algorithm>
#include <cstdio>
#include <regex>

#include "boldsum/config.h"
#include "study_dir.h"

namespace boldsum {
namespace {

using testing::StudyDir;

// Condition names pairwise at least two edits apart, so one corrupted character cannot
// turn one into another.
const std::vector<std::string> kConditionPool = {"melody_known", "melody_new", "press",
                                                 "chord",        "scale_up",   "silence_gap"};

// Shortest text that reads back to the same double (17 significant digits suffice).
std::string Repr(double value) {
  char text[40];
  std::snprintf(text, sizeof text, "%.17g", value);
  return text;
}

double Scaled(long long lo, long long hi, double scale) {
  return static_cast<double>(*rc::gen::inRange<long long>(lo, hi)) * scale;
}

enum class EventsForm { kTable, kPerEvent, kOnsetsList };

struct GeneratedRun {
  EventsForm form = EventsForm::kTable;
  EventsByCondition events;  // in generation order
};

struct GeneratedStudy {
  ModelSpec model;
  std::map<std::string, double> t_weights;
  std::vector<std::map<std::string, double>> f_rows;
  std::vector<std::vector<GeneratedRun>> subjects;
};

GeneratedStudy GenerateStudy() {
  GeneratedStudy study;
  ModelSpec& model = study.model;
  model.tr_s = Scaled(1, 5'000'000'000LL, 1e-9);       // (0, 5] s
  model.slice_reference = Scaled(0, 1'000'000, 1e-6);  // [0, 1]
  model.hrf.shape = *rc::gen::element(HrfShape::kDoubleGamma, HrfShape::kGlover, HrfShape::kFir);
  if (model.hrf.shape == HrfShape::kFir) {
    model.hrf.fir_bins = *rc::gen::inRange(0, 20);  // 0: left to the default
  } else {
    model.hrf.derivatives = *rc::gen::element(HrfDerivatives::kNone, HrfDerivatives::kTime,
                                              HrfDerivatives::kTimeDispersion);
  }
  model.drift.kind =
      *rc::gen::element(DriftKind::kCosine, DriftKind::kPolynomial, DriftKind::kNone);
  if (model.drift.kind == DriftKind::kCosine) model.drift.cutoff_s = Scaled(1, 1'000'000, 1e-3);
  if (model.drift.kind == DriftKind::kPolynomial) model.drift.degree = *rc::gen::inRange(1, 11);
  model.noise = *rc::gen::element(NoiseModel::kAr1, NoiseModel::kNone);
  std::vector<std::string> pool = kConditionPool;
  const int n_conditions = *rc::gen::inRange<int>(1, static_cast<int>(pool.size()) + 1);
  for (int i = 0; i < n_conditions; ++i) {
    const int pick = *rc::gen::inRange<int>(0, static_cast<int>(pool.size()));
    model.conditions.push_back(pool[static_cast<size_t>(pick)]);
    pool.erase(pool.begin() + pick);
  }
  for (const std::string& condition : model.conditions) {
    study.t_weights[condition] = Scaled(1, 4000, 1e-3) * (*rc::gen::arbitrary<bool>() ? 1 : -1);
    study.f_rows.push_back({{condition, 1.0}});
  }
  const int n_subjects = *rc::gen::inRange(1, 4);
  for (int s = 0; s < n_subjects; ++s) {
    std::vector<GeneratedRun> runs(static_cast<size_t>(*rc::gen::inRange(1, 3)));
    for (GeneratedRun& run : runs) {
      run.form =
          *rc::gen::element(EventsForm::kTable, EventsForm::kPerEvent, EventsForm::kOnsetsList);
      for (const std::string& condition : model.conditions) {
        std::vector<Event>& list = run.events[condition];
        const int n_events = *rc::gen::inRange(0, 5);
        for (int e = 0; e < n_events; ++e) {
          list.push_back(Event{Scaled(0, 1'000'000'000, 1e-6), Scaled(0, 30'000'000, 1e-6),
                               Scaled(-5'000'000, 5'000'000, 1e-6)});
        }
      }
    }
    study.subjects.push_back(runs);
  }
  return study;
}

std::string Words(const std::vector<std::string>& names) {
  std::string text;
  for (const std::string& name : names) text += (text.empty() ? "" : ", ") + name;
  return "[" + text + "]";
}

std::string WeightMap(const std::map<std::string, double>& weights) {
  std::string text;
  for (const auto& [name, weight] : weights) {
    text += (text.empty() ? "" : ", ") + name + ": " + Repr(weight);
  }
  return "{" + text + "}";
}

// Writes the study's YAML (and its events tables) into `dir`.
std::string WriteStudy(const GeneratedStudy& study, const StudyDir& dir) {
  const ModelSpec& model = study.model;
  std::string yaml = "tr: " + Repr(model.tr_s) + "\n";
  yaml += "slice_reference: " + Repr(model.slice_reference) + "\n";
  const char* shapes[] = {"double-gamma", "glover", "fir"};
  const char* derivatives[] = {"none", "time", "time+dispersion"};
  yaml += "hrf:\n  shape: " + std::string(shapes[static_cast<int>(model.hrf.shape)]) + "\n";
  if (model.hrf.shape == HrfShape::kFir) {
    if (model.hrf.fir_bins > 0) yaml += "  fir_bins: " + std::to_string(model.hrf.fir_bins) + "\n";
  } else {
    yaml += "  derivatives: " + std::string(derivatives[static_cast<int>(model.hrf.derivatives)]) +
            "\n";
  }
  const char* kinds[] = {"cosine", "polynomial", "none"};
  yaml += "drift: {kind: " + std::string(kinds[static_cast<int>(model.drift.kind)]);
  if (model.drift.kind == DriftKind::kCosine) yaml += ", cutoff_s: " + Repr(model.drift.cutoff_s);
  if (model.drift.kind == DriftKind::kPolynomial) {
    yaml += ", degree: " + std::to_string(model.drift.degree);
  }
  yaml += "}\n";
  yaml +=
      std::string("autocorrelation: ") + (model.noise == NoiseModel::kAr1 ? "ar1" : "none") + "\n";
  yaml += "conditions: " + Words(model.conditions) + "\n";
  yaml += "contrasts:\n  c_t: " + WeightMap(study.t_weights) + "\n  c_f:\n";
  for (const auto& row : study.f_rows) yaml += "    - " + WeightMap(row) + "\n";
  yaml += "subjects:\n";
  for (size_t s = 0; s < study.subjects.size(); ++s) {
    yaml += "  - id: s" + std::to_string(s + 1) + "\n    runs:\n";
    for (size_t r = 0; r < study.subjects[s].size(); ++r) {
      const GeneratedRun& run = study.subjects[s][r];
      yaml += "      - data: run1.nii.gz\n";
      if (run.form == EventsForm::kTable) {
        const std::string name = "events_" + std::to_string(s) + "_" + std::to_string(r) + ".tsv";
        std::string table = "onset\tduration\ttrial_type\tamplitude\n";
        for (const auto& [condition, events] : run.events) {
          for (const Event& e : events) {
            table += Repr(e.onset_s) + "\t" + Repr(e.duration_s) + "\t" + condition + "\t" +
                     Repr(e.amplitude) + "\n";
          }
        }
        dir.Write(name, table);
        yaml += "        events: " + name + "\n";
        continue;
      }
      yaml += "        events:\n";
      for (const auto& [condition, events] : run.events) {
        if (run.form == EventsForm::kPerEvent) {
          yaml += "          " + condition + ":" + (events.empty() ? " []" : "") + "\n";
          for (const Event& e : events) {
            yaml += "            - {onset: " + Repr(e.onset_s) +
                    ", duration: " + Repr(e.duration_s) + ", amplitude: " + Repr(e.amplitude) +
                    "}\n";
          }
          continue;
        }
        std::string onsets, durations, amplitudes;
        for (const Event& e : events) {
          onsets += (onsets.empty() ? "" : ", ") + Repr(e.onset_s);
          durations += (durations.empty() ? "" : ", ") + Repr(e.duration_s);
          amplitudes += (amplitudes.empty() ? "" : ", ") + Repr(e.amplitude);
        }
        yaml += "          " + condition + ":\n";
        yaml += "            onsets: [" + onsets + "]\n";
        yaml += "            duration: [" + durations + "]\n";
        yaml += "            amplitude: [" + amplitudes + "]\n";
      }
    }
  }
  return yaml;
}

std::string ErrorsOf(const LoadedConfig& loaded) {
  std::string text;
  for (const Diagnostic& d : loaded.diagnostics.all()) {
    if (d.severity == Severity::kError) text += d.ToString() + "\n";
  }
  return text;
}

RC_GTEST_PROP(ConfigProperties, GeneratedStudyRoundTripsThroughYaml, ()) {
  const GeneratedStudy study = GenerateStudy();
  StudyDir dir;
  const LoadedConfig loaded = dir.Load(WriteStudy(study, dir));
  RC_ASSERT(ErrorsOf(loaded) == "");
  const ModelSpec& got = loaded.spec.model;
  const ModelSpec& want = study.model;
  RC_ASSERT(got.tr_s == want.tr_s);
  RC_ASSERT(got.slice_reference == want.slice_reference);
  RC_ASSERT(got.hrf.shape == want.hrf.shape);
  RC_ASSERT(got.hrf.derivatives == want.hrf.derivatives);
  RC_ASSERT(got.hrf.fir_bins == want.hrf.fir_bins);
  RC_ASSERT(got.drift.kind == want.drift.kind);
  RC_ASSERT(got.drift.cutoff_s == want.drift.cutoff_s);
  RC_ASSERT(got.drift.degree == want.drift.degree);
  RC_ASSERT(got.noise == want.noise);
  RC_ASSERT(got.conditions == want.conditions);
  RC_ASSERT(loaded.spec.contrasts.size() == 2u);
  const std::vector<std::map<std::string, double>> t_rows = {study.t_weights};
  RC_ASSERT(loaded.spec.contrasts[0].rows == t_rows);
  RC_ASSERT(loaded.spec.contrasts[1].rows == study.f_rows);
  RC_ASSERT(loaded.spec.subjects.size() == study.subjects.size());
  for (size_t s = 0; s < study.subjects.size(); ++s) {
    const SubjectSpec& subject = loaded.spec.subjects[s];
    RC_ASSERT(subject.id == "s" + std::to_string(s + 1));
    RC_ASSERT(subject.runs.size() == study.subjects[s].size());
    for (size_t r = 0; r < subject.runs.size(); ++r) {
      EventsByCondition expected = study.subjects[s][r].events;
      for (auto& entry : expected) {
        std::stable_sort(entry.second.begin(), entry.second.end(),
                         [](const Event& a, const Event& b) { return a.onset_s < b.onset_s; });
      }
      RC_ASSERT(subject.runs[r].events == expected);
      RC_ASSERT(subject.runs[r].data_path == dir.Path("run1.nii.gz"));
    }
  }
}

struct KeyToken {
  int line;      // 1-based
  size_t start;  // offset in the text
  size_t length;
};

// Every mapping key in the text except the contrast names (free names, not vocabulary).
std::vector<KeyToken> FindKeys(const std::string& yaml) {
  std::vector<KeyToken> keys;
  const std::regex key(R"((^|[ {,])([a-z_][a-z0-9_]*):( |$))", std::regex::multiline);
  for (auto it = std::sregex_iterator(yaml.begin(), yaml.end(), key); it != std::sregex_iterator();
       ++it) {
    const std::string word = (*it)[2];
    if (word == "c_t" || word == "c_f") continue;
    const size_t start = static_cast<size_t>(it->position(2));
    const int line = 1 + static_cast<int>(std::count(yaml.begin(), yaml.begin() + start, '\n'));
    keys.push_back(KeyToken{line, start, word.size()});
  }
  return keys;
}

RC_GTEST_PROP(ConfigProperties, CorruptedKeyIsReportedAtItsLine, ()) {
  const GeneratedStudy study = GenerateStudy();
  StudyDir dir;
  std::string yaml = WriteStudy(study, dir);
  const std::vector<KeyToken> keys = FindKeys(yaml);
  RC_ASSERT(!keys.empty());
  const KeyToken token = *rc::gen::elementOf(keys);
  const std::string alphabet = "abcdefghijklmnopqrstuvwxyz0123456789_";
  const size_t at =
      token.start + static_cast<size_t>(*rc::gen::inRange<int>(0, static_cast<int>(token.length)));
  const int edit = *rc::gen::inRange(0, token.length > 1 ? 3 : 2);
  const char letter = *rc::gen::elementOf(alphabet);
  if (edit == 0) {  // replace
    yaml[at] = letter == yaml[at] ? (letter == 'q' ? 'z' : 'q') : letter;
  } else if (edit == 1) {  // insert
    yaml.insert(at, 1, letter);
  } else {  // delete
    yaml.erase(at, 1);
  }
  RC_TAG(edit);
  const LoadedConfig loaded = dir.Load(yaml);
  bool at_line = false;
  for (const Diagnostic& d : loaded.diagnostics.all()) {
    at_line = at_line || (d.severity == Severity::kError && d.where.line == token.line &&
                          d.where.file == dir.ConfigPath());
  }
  RC_ASSERT(at_line);
}

}  // namespace
}  // namespace boldsum
