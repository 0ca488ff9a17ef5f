#include "config/events_loader.h"

#include <algorithm>
#include <set>
#include <string>
#include <vector>

#include "boldsum/io.h"

namespace boldsum::config {
namespace {

EventsByCondition EmptyEvents(const ModelSpec& model) {
  EventsByCondition events;
  for (const std::string& condition : model.conditions) events[condition];
  return events;
}

void SortByOnset(EventsByCondition* events) {
  for (auto& entry : *events) {
    std::stable_sort(entry.second.begin(), entry.second.end(),
                     [](const Event& a, const Event& b) { return a.onset_s < b.onset_s; });
  }
}

bool Contains(const std::vector<std::string>& names, const std::string& name) {
  return std::find(names.begin(), names.end(), name) != names.end();
}

struct CellRule {
  std::string column;
  std::string what;     // completes "expected ..."
  std::string na_hint;  // completes "'n/a' is not allowed; ..."
  bool non_negative;
};

}  // namespace

std::optional<EventsByCondition> LoadEventsTable(YamlReader& reader, const ResolvedPath& path,
                                                 const SourceLocation& anchor,
                                                 const ModelSpec& model, bool check_types) {
  Reporter& reporter = reader.reporter();
  auto report = [&](const SourceLocation& where, const std::string& message) {
    reporter.Add(Severity::kError, where, message, anchor);
  };
  const std::optional<Table> read = reader.ReadTableAt(path, anchor);
  if (!read) return std::nullopt;
  const Table& table = *read;
  static const std::vector<CellRule> kRules = {
      {"onset", "a number in seconds", "give the onset in seconds", true},
      {"duration", "a number in seconds", "give the duration in seconds (0 for an impulse)", true},
      {"amplitude", "a number", "give a number (1 for an unmodulated event)", false}};
  bool ok = true;
  std::vector<int> column_of;
  for (const CellRule& rule : kRules) {
    column_of.push_back(table.ColumnIndex(rule.column));
    if (column_of.back() < 0 && rule.column != "amplitude") {
      report(SourceLocation{table.path, 1, 0},
             "missing required column '" + rule.column +
                 "' (an events table needs onset, duration and trial_type)");
      ok = false;
    }
  }
  const int type_column = table.ColumnIndex("trial_type");
  if (type_column < 0) {
    report(SourceLocation{table.path, 1, 0},
           "missing required column 'trial_type' (an events table needs onset, duration and "
           "trial_type)");
    ok = false;
  }
  if (!ok) return std::nullopt;

  EventsByCondition events = EmptyEvents(model);
  std::vector<std::pair<std::string, int>> unknown;  // trial type, row of first use
  for (int r = 0; r < static_cast<int>(table.rows.size()); ++r) {
    const std::vector<std::string>& row = table.rows[static_cast<std::size_t>(r)];
    const std::string& type = row[static_cast<std::size_t>(type_column)];
    if (Contains(model.ignored, type)) continue;
    if (!Contains(model.conditions, type)) {
      const bool seen = std::any_of(unknown.begin(), unknown.end(),
                                    [&](const auto& u) { return u.first == type; });
      if (!seen && check_types) unknown.emplace_back(type, r);
      continue;
    }
    double values[3] = {0.0, 0.0, 1.0};
    bool row_ok = true;
    for (std::size_t i = 0; i < kRules.size(); ++i) {
      if (column_of[i] < 0) continue;
      const std::string& cell = row[static_cast<std::size_t>(column_of[i])];
      const SourceLocation where = table.CellLocation(r, column_of[i]);
      const std::string prefix = "column '" + kRules[i].column + "': ";
      if (cell == "n/a") {
        report(where, prefix + "'n/a' is not allowed; " + kRules[i].na_hint);
        row_ok = false;
      } else if (!ParseNumber(cell, &values[i])) {
        report(where, prefix + "expected " + kRules[i].what + ", got '" + cell + "'");
        row_ok = false;
      } else if (kRules[i].non_negative && values[i] < 0) {
        report(where, prefix + "must be >= 0 seconds, got " + cell);
        row_ok = false;
      }
    }
    if (row_ok) {
      events[type].push_back(Event{values[0], values[1], values[2]});
    } else {
      ok = false;
    }
  }
  if (!unknown.empty()) {
    std::string list;
    for (const auto& [type, r] : unknown) {
      const std::string near = ClosestMatch(type, model.conditions);
      list += (list.empty() ? "'" : ", '") + type + "' (line " + std::to_string(r + 2) +
              (near.empty() ? "" : "; did you mean '" + near + "'?") + ")";
    }
    report(table.CellLocation(unknown.front().second, type_column),
           "trial types not listed under conditions: " + list +
               "; add them to conditions or to ignore");
    ok = false;
  }
  if (!ok) return std::nullopt;
  SortByOnset(&events);
  return events;
}

namespace {

// One inline event {onset, duration, amplitude}.
std::optional<Event> ReadOneEvent(YamlReader& reader, const Field& field) {
  const auto fields = reader.Fields(field, InlineEventKeys());
  if (!fields) return std::nullopt;
  Event event;
  bool ok = fields->count("onset") != 0 && fields->count("duration") != 0;
  for (const auto& [name, value_field] : *fields) {
    const bool is_time = name != "amplitude";
    const auto value = reader.Number(value_field, is_time ? "a number in seconds" : "a number");
    if (!value) {
      ok = false;
    } else if (is_time && *value < 0) {
      reader.Error(value_field, "must be >= 0 seconds, got " + value_field.value.Scalar());
      ok = false;
    } else if (name == "onset") {
      event.onset_s = *value;
    } else if (name == "duration") {
      event.duration_s = *value;
    } else {
      event.amplitude = *value;
    }
  }
  return ok ? std::optional<Event>(event) : std::nullopt;
}

// A number or a list of `count` numbers; `what` describes one number.
std::optional<std::vector<double>> ReadOneOrMany(YamlReader& reader, const Field& field,
                                                 std::size_t count, const std::string& what,
                                                 bool non_negative) {
  std::vector<Field> items;
  if (field.value.IsSequence()) {
    items = *reader.Items(field, what + " or a list of them");
    if (items.size() != count) {
      reader.Error(field, "has " + std::to_string(items.size()) + " values but onsets has " +
                              std::to_string(count));
      return std::nullopt;
    }
  } else if (field.value.IsScalar()) {
    items.assign(count, field);
  } else {
    reader.ReportWrongType(field, what + " or a list of them");
    return std::nullopt;
  }
  std::vector<double> values;
  bool ok = true;
  for (std::size_t i = 0; i < items.size(); ++i) {
    const auto value = reader.Number(items[i], what);
    if (!value) {
      ok = false;
      if (!field.value.IsSequence()) break;
    } else if (non_negative && *value < 0) {
      reader.Error(items[i], "must be >= 0 seconds, got " + items[i].value.Scalar());
      ok = false;
      if (!field.value.IsSequence()) break;
    } else {
      values.push_back(*value);
    }
  }
  return ok ? std::optional<std::vector<double>>(values) : std::nullopt;
}

// {onsets: [...], duration: x | [...], amplitude: a | [...]}.
std::optional<std::vector<Event>> ReadOnsetsForm(YamlReader& reader, const Field& field) {
  const auto fields = reader.Fields(field, InlineOnsetsKeys());
  if (!fields || fields->count("onsets") == 0 || fields->count("duration") == 0) {
    return std::nullopt;
  }
  const Field& onsets_field = fields->at("onsets");
  if (!onsets_field.value.IsSequence()) {
    reader.ReportWrongType(onsets_field, "a list of onsets in seconds");
    return std::nullopt;
  }
  const std::size_t count = onsets_field.value.size();
  const auto onsets = ReadOneOrMany(reader, onsets_field, count, "a number in seconds", true);
  const auto durations =
      ReadOneOrMany(reader, fields->at("duration"), count, "a number in seconds", true);
  std::optional<std::vector<double>> amplitudes = std::vector<double>(count, 1.0);
  if (fields->count("amplitude") != 0) {
    amplitudes = ReadOneOrMany(reader, fields->at("amplitude"), count, "a number", false);
  }
  if (!onsets || !durations || !amplitudes) return std::nullopt;
  std::vector<Event> events;
  for (std::size_t i = 0; i < count; ++i) {
    events.push_back(Event{(*onsets)[i], (*durations)[i], (*amplitudes)[i]});
  }
  return events;
}

}  // namespace

std::optional<EventsByCondition> ReadInlineEvents(YamlReader& reader, const Field& field,
                                                  const ModelSpec& model, bool check_types) {
  const auto entries = reader.Entries(field, "a mapping of trial types to events");
  if (!entries) return std::nullopt;
  EventsByCondition events = EmptyEvents(model);
  bool ok = true;
  for (const Field& entry : *entries) {
    const std::string type = entry.key.Scalar();
    if (Contains(model.ignored, type)) continue;
    if (!Contains(model.conditions, type)) {
      if (check_types) {
        const std::string near = ClosestMatch(type, model.conditions);
        reader.Error(
            reader.At(entry.key),
            Prefixed(field.path, "trial type '" + type + "' is not listed under conditions" +
                                     (near.empty() ? "" : " (did you mean '" + near + "'?)") +
                                     "; add it to conditions or to ignore"));
        ok = false;
      }
      continue;
    }
    std::vector<Event>& list = events[type];
    if (entry.value.IsNull()) continue;
    if (entry.value.IsSequence()) {
      const std::vector<Field> items = *reader.Items(entry, "a list of events");
      for (const Field& item : items) {
        if (auto event = ReadOneEvent(reader, item)) {
          list.push_back(*event);
        } else {
          ok = false;
        }
      }
    } else if (entry.value.IsMap()) {
      if (auto many = ReadOnsetsForm(reader, entry)) {
        list.insert(list.end(), many->begin(), many->end());
      } else {
        ok = false;
      }
    } else {
      reader.ReportWrongType(entry,
                             "a list of {onset, duration, amplitude} or a mapping "
                             "{onsets, duration, amplitude}");
      ok = false;
    }
  }
  if (!ok) return std::nullopt;
  SortByOnset(&events);
  return events;
}

}  // namespace boldsum::config
