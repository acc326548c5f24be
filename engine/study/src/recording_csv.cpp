// CSV recordings: a header row, then one sample a row, comma or semicolon separated.
#include <algorithm>

#include "droopline/format.hpp"
#include "droopline/recording.hpp"

namespace droopline::study {
namespace {

// The fields of one line; false when a quote is left open. "" inside quotes is one quote.
bool split_line(std::string_view line, char sep, std::vector<std::string>& fields) {
  fields.clear();
  std::string field;
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
        field += '"';
        ++i;
      } else if (c == '"') {
        quoted = false;
      } else {
        field += c;
      }
    } else if (c == '"') {
      quoted = true;
    } else if (c == sep) {
      fields.push_back(std::move(field));
      field.clear();
    } else {
      field += c;
    }
  }
  fields.push_back(std::move(field));
  return !quoted;
}

// The separator is whichever of ',' and ';' the header uses more outside quotes: a semicolon file
// may carry decimal commas only inside its cells, never in its header names.
char separator_of(std::string_view header) {
  std::size_t commas = 0, semicolons = 0;
  bool quoted = false;
  for (char c : header) {
    if (c == '"') quoted = !quoted;
    if (!quoted && c == ',') ++commas;
    if (!quoted && c == ';') ++semicolons;
  }
  return semicolons > commas ? ';' : ',';
}

}  // namespace

std::optional<Recording> read_csv_recording(const std::string& path, const RecordingOptions& options,
                                            std::vector<Issue>& issues) {
  const auto text = detail::read_checked(path, options, issues);
  if (!text) return std::nullopt;
  return read_csv_recording_text(*text, path, options, issues);
}

std::optional<Recording> read_csv_recording_text(std::string_view text, const std::string& name,
                                                 const RecordingOptions& options, std::vector<Issue>& issues) {
  if (!detail::check_options(options, issues)) return std::nullopt;  // again for callers from memory
  const std::vector<std::string_view> lines = detail::lines_of(text);
  if (lines.empty() || detail::trim(lines[0]).empty()) {
    issues.push_back({name + " line 1", "empty: a header row naming the columns is expected", false});
    return std::nullopt;
  }
  const char sep = separator_of(lines[0]);
  std::vector<std::string> header;
  if (!split_line(lines[0], sep, header)) {
    issues.push_back({name + " line 1", "a quote is left open", false});
    return std::nullopt;
  }
  for (std::string& h : header) h = std::string(detail::trim(h));

  // Wanted columns: time, frequency, then each power series.
  std::vector<std::string> wanted{options.time_column, options.frequency_column};
  wanted.insert(wanted.end(), options.power_columns.begin(), options.power_columns.end());
  const auto chosen = detail::choose(header, wanted, name + " line 1", "column", issues);
  if (!chosen) return std::nullopt;
  const std::vector<std::size_t>& index = *chosen;

  // Blank lines are allowed only at the end (an editor's trailing newline).
  std::size_t last = lines.size();
  while (last > 1 && detail::trim(lines[last - 1]).empty()) --last;

  Recording rec;
  rec.source = name;
  std::vector<std::vector<double>> cols(wanted.size());
  std::vector<std::string> fields;
  const std::size_t before = issues.size();
  for (std::size_t li = 1; li < last && issues.size() - before < 20; ++li) {
    const std::string where = name + " line " + std::to_string(li + 1);
    if (detail::trim(lines[li]).empty()) {
      issues.push_back({where, "blank line inside the data", false});
      continue;
    }
    if (!split_line(lines[li], sep, fields)) {
      issues.push_back({where, "a quote is left open", false});
      continue;
    }
    // A row of another width has lost or gained a field somewhere (a thousands separator, a
    // value split in two): which value belongs to which column can no longer be told.
    if (fields.size() != header.size()) {
      issues.push_back({where, std::to_string(fields.size()) + " fields where the header has " +
                                   std::to_string(header.size()) +
                                   (sep == ',' ? " (a comma inside a number, such as a thousands separator?)" : ""),
                        false});
      continue;
    }
    for (std::size_t w = 0; w < wanted.size(); ++w) {
      const std::string at = where + " column \"" + clip_text(wanted[w], 60) + "\"";
      double v = 0.0;
      if (index[w] >= fields.size() || detail::trim(fields[index[w]]).empty()) {
        issues.push_back({at, "missing value", false});
      } else if (!detail::parse_number(fields[index[w]], v)) {
        const std::string cell(detail::trim(fields[index[w]]));
        const bool decimal_comma = sep == ';' && cell.find(',') != std::string::npos;
        issues.push_back({at,
                          "\"" + clip_text(cell, 40) + "\" is not a finite number" +
                              (decimal_comma ? " (decimal commas are not read: use a point)" : ""),
                          false});
      } else if (w == 0 && !cols[0].empty() && !(v > cols[0].back())) {
        issues.push_back(
            {at, "time " + fmt_num(v) + " s does not come after the previous " + fmt_num(cols[0].back()) + " s",
             false});
      }
      cols[w].push_back(v);
    }
  }
  if (issues.size() > before) return std::nullopt;
  if (cols[0].size() < 2) {
    issues.push_back({name, "needs at least two samples, has " + std::to_string(cols[0].size()), false});
    return std::nullopt;
  }
  rec.t_s = std::move(cols[0]);
  rec.frequency_hz = std::move(cols[1]);
  for (std::size_t w = 2; w < wanted.size(); ++w) rec.power_mw.emplace_back(wanted[w], std::move(cols[w]));
  if (!detail::finish(rec, options, issues)) return std::nullopt;
  return rec;
}

}  // namespace droopline::study
