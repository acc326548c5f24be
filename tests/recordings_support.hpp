#pragma once
// Builders for the recording tests: COMTRADE records laid out by hand from the standard's file
// layout (IEEE C37.111, clauses as recalled from memory, not from a copy of the standard) and
// small CSV files, all written to a fresh temporary folder.
#include <unistd.h>

#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <optional>
#include <string>
#include <vector>

#include "droopline/format.hpp"
#include "droopline/recording.hpp"
#include "support.hpp"

namespace rec_test {

namespace fs = std::filesystem;

/// A fresh folder per test case.
inline fs::path temp_folder(const std::string& name) {
  const fs::path p = test::scratch_path("recordings-" + name);
  fs::create_directories(p);
  return p;
}

inline void write(const fs::path& path, const std::string& bytes) {
  std::ofstream out(path, std::ios::binary);
  out << bytes;
  REQUIRE(out.good());
}

/// One analog channel line's fields.
struct Channel {
  std::string id;
  std::string unit = "MW";
  double a = 1.0, b = 0.0;
  double primary = 1.0, secondary = 1.0;
  std::string ps = "P";
  double skew_us = 0.0;
};

/// What goes into a .cfg; rates as (samp, endsamp), a single (0, N) meaning nrates 0.
struct Layout {
  std::string revision = "1999";
  std::vector<Channel> analogs;
  int digitals = 0;
  std::vector<std::pair<double, int>> rates{{10.0, 10}};
  std::string file_type = "ASCII";
  double timemult = 1.0;
  std::string start = "03/12/2026,09:30:00.000000";
};

/// The .cfg text, CRLF line ends as the standard asks (from memory).
inline std::string cfg_of(const Layout& l) {
  const std::string crlf = "\r\n";
  // Configuration-file clause (from memory): station_name,rec_dev_id,rev_year; TT,##A,##D.
  std::string s = "Kestrel Bay,unit recorder 7," + l.revision + crlf;
  const std::size_t na = l.analogs.size();
  s += std::to_string(na + l.digitals) + "," + std::to_string(na) + "A," + std::to_string(l.digitals) + "D" + crlf;
  // Analog lines An,ch_id,ph,ccbm,uu,a,b,skew,min,max,primary,secondary,PS.
  for (std::size_t k = 0; k < na; ++k) {
    const Channel& c = l.analogs[k];
    s += std::to_string(k + 1) + "," + c.id + ",,G1," + c.unit + "," + droopline::fmt_exact(c.a) + "," +
         droopline::fmt_exact(c.b) + "," + droopline::fmt_exact(c.skew_us) + ",-32767,32767," +
         droopline::fmt_exact(c.primary) + "," + droopline::fmt_exact(c.secondary) + "," + c.ps + crlf;
  }
  // Digital lines Dn,ch_id,ph,ccbm,y.
  for (int k = 0; k < l.digitals; ++k)
    s += std::to_string(k + 1) + ",breaker " + std::to_string(k + 1) + ",,G1,0" + crlf;
  // Line frequency; nrates; samp,endsamp per rate (one 0,endsamp line when nrates is 0).
  s += "50" + crlf;
  const bool stamps = l.rates.size() == 1 && l.rates[0].first == 0.0;
  s += std::to_string(stamps ? 0 : l.rates.size()) + crlf;
  for (const auto& [samp, end] : l.rates) s += droopline::fmt_exact(samp) + "," + std::to_string(end) + crlf;
  // First sample and trigger times, file type, time multiplier.
  s += l.start + crlf + l.start + crlf + l.file_type + crlf + droopline::fmt_exact(l.timemult) + crlf;
  // 2013 (from memory): time_code,local_code, then tmq_code,leapsec.
  if (l.revision == "2013") s += "+1h,+1h" + crlf + "0,0" + crlf;
  return s;
}

/// One sample as recorded: timestamp (nothing: missing), raw analog values (nothing: missing), digital states.
struct Row {
  std::optional<std::uint32_t> stamp;
  std::vector<std::optional<double>> x;
  std::vector<int> states;
};

/// ASCII data clause (from memory): n,timestamp,A1..An,D1..Dn, a blank field for a missing value.
inline std::string ascii_of(const std::vector<Row>& rows) {
  std::string s;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    s += std::to_string(i + 1) + "," + (rows[i].stamp ? std::to_string(*rows[i].stamp) : "");
    for (const auto& x : rows[i].x) s += "," + (x ? droopline::fmt_exact(*x) : "");
    for (int d : rows[i].states) s += "," + std::to_string(d);
    s += "\r\n";
  }
  return s;
}

inline void put_le(std::string& s, std::uint32_t v, int bytes) {
  for (int b = 0; b < bytes; ++b) s += static_cast<char>((v >> (8 * b)) & 0xFF);
}

/// Binary data clause (from memory): uint32 sample number, uint32 timestamp (0xFFFFFFFF missing),
/// analog int16 (BINARY, 0x8000 missing), int32 (BINARY32, 0x80000000 missing) or float32 (FLOAT32),
/// then the digital states 16 to a uint16 word, all little-endian.
inline std::string binary_of(const std::string& file_type, const std::vector<Row>& rows) {
  std::string s;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    put_le(s, static_cast<std::uint32_t>(i + 1), 4);
    put_le(s, rows[i].stamp.value_or(0xFFFFFFFFu), 4);
    for (const auto& x : rows[i].x) {
      if (file_type == "BINARY") {
        put_le(s, x ? static_cast<std::uint16_t>(static_cast<std::int16_t>(*x)) : 0x8000u, 2);
      } else if (file_type == "BINARY32") {
        put_le(s, x ? static_cast<std::uint32_t>(static_cast<std::int32_t>(*x)) : 0x80000000u, 4);
      } else {
        const float f = static_cast<float>(x.value_or(0.0));
        std::uint32_t bits = 0;
        std::memcpy(&bits, &f, 4);
        put_le(s, bits, 4);
      }
    }
    for (std::size_t w = 0; w < (rows[i].states.size() + 15) / 16; ++w) {
      std::uint32_t word = 0;
      for (std::size_t b = 0; b < 16 && 16 * w + b < rows[i].states.size(); ++b)
        word |= static_cast<std::uint32_t>(rows[i].states[16 * w + b] & 1) << b;
      put_le(s, word, 2);
    }
  }
  return s;
}

/// Writes `stem`.cfg and `stem`.dat (ASCII or binary by the layout's file type) into `dir`; the .cfg's path.
inline std::string write_record(const fs::path& dir, const std::string& stem, const Layout& l,
                                const std::vector<Row>& rows) {
  write(dir / (stem + ".cfg"), cfg_of(l));
  write(dir / (stem + ".dat"), l.file_type == "ASCII" ? ascii_of(rows) : binary_of(l.file_type, rows));
  return (dir / (stem + ".cfg")).string();
}

/// The recording, or a failed test listing the issues.
inline droopline::study::Recording read_ok(const std::string& path, const droopline::study::RecordingOptions& o) {
  std::vector<droopline::Issue> issues;
  auto r = droopline::study::read_recording(path, o, issues);
  std::string msgs;
  for (const auto& i : issues) msgs += i.text() + "\n";
  INFO(msgs);
  REQUIRE(r);
  return *r;
}

/// Whether any warning contains `part`.
inline bool warned(const droopline::study::Recording& r, const std::string& part) {
  for (const auto& w : r.warnings)
    if (w.find(part) != std::string::npos) return true;
  return false;
}

}  // namespace rec_test
