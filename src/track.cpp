// Track runner, shard slicing, track tables (CSV/JSON, parse, join) and the along-track
// summary. The per-model physics (evaluate_model, run_track) lives in track_eval.cpp.
#include "radmode/track.hpp"

#include "radmode/error.hpp"
#include "radmode/json.hpp"
#include "radmode/version.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <cstdlib>
#include <exception>
#include <filesystem>
#include <fstream>
#include <map>
#include <mutex>
#include <set>
#include <sstream>
#include <thread>

#if defined(__GLIBC__)
#include <malloc.h>
#endif

namespace radmode {

namespace {

std::string trim(const std::string& s) {
  const auto b = s.find_first_not_of(" \t\r");
  if (b == std::string::npos) return {};
  const auto e = s.find_last_not_of(" \t\r");
  return s.substr(b, e - b + 1);
}

/// Parses the whole string as a finite double.
std::optional<double> parse_double(const std::string& s) {
  if (s.empty()) return std::nullopt;
  char* end = nullptr;
  const double x = std::strtod(s.c_str(), &end);
  if (end != s.c_str() + s.size() || !std::isfinite(x)) return std::nullopt;
  return x;
}

// Fixed columns before and after the metadata and period columns.
const std::vector<std::string>& head_columns() {
  static const std::vector<std::string> c{"index", "file"};
  return c;
}
const std::vector<std::string>& middle_columns() {
  static const std::vector<std::string> c{"status",  "message",   "mass_g",
                                          "radius_cm", "t_dyn_s", "gamma1_pressure_weighted",
                                          "sigma2_0"};
  return c;
}
const std::vector<std::string>& tail_columns() {
  static const std::vector<std::string> c{"P1_over_P0", "Q_d_0", "stable", "growth_time_s",
                                          "verdict_pn"};
  return c;
}
const char* const period_prefix = "period_d_";
const char* const meta_prefix = "meta:";

bool is_fixed_column(const std::string& name) {
  for (const auto* list : {&head_columns(), &middle_columns(), &tail_columns()})
    if (std::find(list->begin(), list->end(), name) != list->end()) return true;
  return name.rfind(period_prefix, 0) == 0;
}

/// Column name of a metadata key: the key itself, or "meta:key" when it would collide with
/// a fixed column.
std::string meta_column_name(const std::string& key) {
  return is_fixed_column(key) || key.rfind(meta_prefix, 0) == 0 ? meta_prefix + key : key;
}
std::string meta_key_of_column(const std::string& column) {
  if (column.rfind(meta_prefix, 0) == 0) return column.substr(std::string(meta_prefix).size());
  return column;
}

std::string num(const std::optional<double>& x) {
  return x && std::isfinite(*x) ? JsonWriter::number(*x) : std::string();
}

std::string csv_field(const std::string& s) {
  if (s.find_first_of(",\"\n\r") == std::string::npos) return s;
  std::string out = "\"";
  for (char c : s) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

/// Cell texts of one row, in track_columns() order.
std::vector<std::string> row_cells(const TrackRow& row, const std::vector<std::string>& meta_keys,
                                   int count) {
  std::vector<std::string> cells;
  cells.push_back(std::to_string(row.index));
  cells.push_back(row.file);
  for (const auto& key : meta_keys) cells.push_back(row.meta(key));
  cells.push_back(row.status);
  cells.push_back(row.message);
  cells.push_back(num(row.mass_g));
  cells.push_back(num(row.radius_cm));
  cells.push_back(num(row.t_dyn_s));
  cells.push_back(num(row.gamma1_pressure_weighted));
  cells.push_back(num(row.sigma2_0));
  for (int k = 0; k < count; ++k) {
    const auto uk = static_cast<std::size_t>(k);
    cells.push_back(uk < row.period_d.size() ? num(row.period_d[uk]) : std::string());
  }
  cells.push_back(num(row.p1_over_p0));
  cells.push_back(num(row.q_d_0));
  cells.push_back(row.stable ? (*row.stable ? "true" : "false") : "");
  cells.push_back(num(row.growth_time_s));
  cells.push_back(row.verdict_pn);
  return cells;
}

/// Splits CSV text into records of fields (RFC 4180 quoting), recording each record's
/// first line number. Lines starting with '#' outside quotes before the header are returned
/// separately as comments.
struct CsvRecord {
  std::size_t line = 0;
  std::vector<std::string> fields;
};

std::vector<CsvRecord> split_csv(const std::string& text, const std::string& source,
                                 std::vector<std::pair<std::size_t, std::string>>& comments) {
  std::vector<CsvRecord> records;
  std::size_t pos = 0, line = 1;
  while (pos < text.size()) {
    if (records.empty() && text[pos] == '#') {
      const auto eol = text.find('\n', pos);
      const auto end = eol == std::string::npos ? text.size() : eol;
      comments.emplace_back(line, text.substr(pos, end - pos));
      pos = end + 1;
      ++line;
      continue;
    }
    CsvRecord rec;
    rec.line = line;
    std::string field;
    bool done = false;
    while (!done) {
      if (pos < text.size() && text[pos] == '"') {
        ++pos;
        for (;;) {
          if (pos >= text.size())
            throw InputError(ErrorKind::bad_format, Location{source, rec.line, 0, {}},
                             "a quoted field that is never closed");
          if (text[pos] == '"') {
            if (pos + 1 < text.size() && text[pos + 1] == '"') {
              field += '"';
              pos += 2;
              continue;
            }
            ++pos;
            break;
          }
          if (text[pos] == '\n') ++line;
          field += text[pos++];
        }
      }
      while (pos < text.size() && text[pos] != ',' && text[pos] != '\n') {
        if (text[pos] == '"')
          throw InputError(ErrorKind::bad_format, Location{source, line, 0, {}},
                           "a quote inside an unquoted field (expected RFC 4180 CSV)");
        if (text[pos] != '\r') field += text[pos];
        ++pos;
      }
      rec.fields.push_back(std::move(field));
      field.clear();
      if (pos >= text.size() || text[pos] == '\n') {
        done = true;
        ++line;
      }
      ++pos;
    }
    records.push_back(std::move(rec));
  }
  return records;
}

} // namespace

// ---- rows, options ----------------------------------------------------------------------

std::string TrackRow::meta(const std::string& key) const {
  for (const auto& [k, v] : metadata)
    if (k == key) return v;
  return {};
}

void TrackOptions::validate() const {
  if (count < 1 || count > 50)
    throw UsageError("--count " + std::to_string(count) + ": expected a number of modes 1..50");
  if (jobs < 0 || jobs > 4096)
    throw UsageError("--jobs " + std::to_string(jobs) +
                     ": expected a number of threads 1..4096 (0 = all cores)");
  SolveOptions s = solve;
  s.count = count;
  s.validate();
}

int TrackOptions::effective_jobs() const {
  if (jobs > 0) return jobs;
  const unsigned hw = std::thread::hardware_concurrency();
  return hw == 0 ? 1 : static_cast<int>(hw);
}

std::size_t TrackRun::failed() const {
  return static_cast<std::size_t>(
      std::count_if(rows.begin(), rows.end(), [](const TrackRow& r) { return !r.ok(); }));
}

// ---- runner -----------------------------------------------------------------------------

std::size_t run_parallel(std::size_t n, int jobs, const std::function<void(std::size_t)>& task,
                         const TrackProgress& progress, const std::atomic<bool>* stop,
                         double progress_interval_s) {
  if (jobs < 1) throw UsageError("--jobs " + std::to_string(jobs) + ": expected at least 1");
  const std::size_t threads = std::min<std::size_t>(static_cast<std::size_t>(jobs),
                                                    std::max<std::size_t>(n, 1));
  std::atomic<std::size_t> next{0}, done{0}, finished_workers{0};
  std::atomic<bool> abort{false};
  std::exception_ptr error;
  std::mutex mutex;
  std::condition_variable wake;

  auto worker = [&] {
    for (;;) {
      if (abort.load() || (stop && stop->load())) break;
      const std::size_t i = next.fetch_add(1);
      if (i >= n) break;
      try {
        task(i);
      } catch (...) {
        std::lock_guard<std::mutex> lock(mutex);
        if (!error) error = std::current_exception();
        abort = true;
      }
      done.fetch_add(1);
    }
    {
      std::lock_guard<std::mutex> lock(mutex);
      finished_workers.fetch_add(1);
    }
    wake.notify_all();
  };

  std::vector<std::thread> pool;
  pool.reserve(threads);
  for (std::size_t t = 0; t < threads; ++t) pool.emplace_back(worker);

  const auto interval = std::chrono::duration<double>(progress_interval_s);
  {
    std::unique_lock<std::mutex> lock(mutex);
    while (finished_workers.load() < threads) {
      wake.wait_for(lock, interval, [&] { return finished_workers.load() >= threads; });
      if (progress && finished_workers.load() < threads) {
        lock.unlock();
        progress(done.load(), n);
        lock.lock();
      }
    }
  }
  for (auto& t : pool) t.join();
  if (error) std::rethrow_exception(error);
  if (progress) progress(done.load(), n);
  return done.load();
}

TrackRun run_rows(const std::vector<std::string>& paths, const std::vector<std::size_t>& indices,
                  const RowFunction& row_for, int jobs, const TrackProgress& progress,
                  const std::atomic<bool>* stop) {
  if (!indices.empty() && indices.size() != paths.size())
    throw std::logic_error("run_rows: indices and paths differ in length");
  std::vector<TrackRow> rows(paths.size());
  std::vector<char> complete(paths.size(), 0);
  run_parallel(
      paths.size(), jobs,
      [&](std::size_t k) {
        TrackRow row;
        try {
          row = row_for(paths[k]);
        } catch (const Error& e) {
          row = TrackRow{};
          row.status = error_kind_name(e.kind());
          row.message = e.what();
        } catch (const std::exception& e) {
          row = TrackRow{};
          row.status = "internal";
          row.message = e.what();
        }
        row.index = indices.empty() ? k : indices[k];
        row.file = paths[k];
        rows[k] = std::move(row);
        complete[k] = 1;
      },
      progress, stop);
  TrackRun run;
  for (std::size_t k = 0; k < rows.size(); ++k)
    if (complete[k]) run.rows.push_back(std::move(rows[k]));
  run.cancelled = run.rows.size() < paths.size();
  return run;
}

// ---- shards, lists ----------------------------------------------------------------------

void keep_freed_memory() noexcept {
#if defined(__GLIBC__)
  mallopt(M_MMAP_THRESHOLD, 32 << 20);
  mallopt(M_TRIM_THRESHOLD, 64 << 20);
#endif
}

std::vector<std::size_t> shard_indices(std::size_t total, int shard, int shards) {
  if (shards < 1 || shard < 0 || shard >= shards)
    throw UsageError("--shard " + std::to_string(shard) + "/" + std::to_string(shards) +
                     ": expected i/N with 0 <= i < N");
  std::vector<std::size_t> out;
  for (std::size_t i = static_cast<std::size_t>(shard); i < total;
       i += static_cast<std::size_t>(shards))
    out.push_back(i);
  return out;
}

std::pair<int, int> parse_shard(const std::string& text, const std::string& option) {
  const auto bad = [&] {
    return UsageError(option + " '" + text +
                      "': expected i/N with whole numbers 0 <= i < N (0-based shard i of N)");
  };
  const auto slash = text.find('/');
  if (slash == std::string::npos) throw bad();
  const std::string a = text.substr(0, slash), b = text.substr(slash + 1);
  const auto whole = [](const std::string& s) {
    return !s.empty() && s.size() <= 6 &&
           std::all_of(s.begin(), s.end(), [](char c) { return c >= '0' && c <= '9'; });
  };
  if (!whole(a) || !whole(b)) throw bad();
  const int i = std::stoi(a), n = std::stoi(b);
  if (n < 1 || i >= n) throw bad();
  return {i, n};
}

std::vector<std::string> read_model_list(const std::string& list_path) {
  std::ifstream in(list_path);
  if (!in) throw Error(ErrorKind::io, list_path + ": cannot open the model list");
  namespace fs = std::filesystem;
  const fs::path dir = fs::path(list_path).parent_path();
  std::vector<std::string> paths;
  std::string line;
  std::size_t number = 0;
  while (std::getline(in, line)) {
    ++number;
    const std::string t = trim(line);
    if (t.empty() || t[0] == '#') continue;
    const fs::path p(t);
    paths.push_back(p.is_absolute() || dir.empty() ? t : (dir / p).string());
  }
  if (in.bad()) throw Error(ErrorKind::io, list_path + ": read error");
  if (paths.empty())
    throw InputError(ErrorKind::bad_format, Location{list_path, 0, 0, {}},
                     "the model list names no model (expected one path per line)");
  return paths;
}

// ---- tables -----------------------------------------------------------------------------

std::vector<std::string> metadata_columns(const std::vector<TrackRow>& rows) {
  std::vector<std::string> keys;
  std::set<std::string> seen;
  for (const auto& row : rows)
    for (const auto& [k, v] : row.metadata)
      if (!v.empty() && seen.insert(k).second) keys.push_back(k);
  return keys;
}

std::vector<std::string> track_columns(const TrackTable& table) {
  std::vector<std::string> cols = head_columns();
  for (const auto& key : metadata_columns(table.rows)) cols.push_back(meta_column_name(key));
  cols.insert(cols.end(), middle_columns().begin(), middle_columns().end());
  for (int k = 0; k < table.count; ++k) cols.push_back(period_prefix + std::to_string(k));
  cols.insert(cols.end(), tail_columns().begin(), tail_columns().end());
  return cols;
}

std::string format_track_csv(const TrackTable& table) {
  std::ostringstream out;
  for (const auto& [k, v] : table.settings) out << "# " << k << " = " << v << '\n';
  const auto cols = track_columns(table);
  for (std::size_t c = 0; c < cols.size(); ++c) out << (c ? "," : "") << csv_field(cols[c]);
  out << '\n';
  const auto keys = metadata_columns(table.rows);
  for (const auto& row : table.rows) {
    const auto cells = row_cells(row, keys, table.count);
    for (std::size_t c = 0; c < cells.size(); ++c) out << (c ? "," : "") << csv_field(cells[c]);
    out << '\n';
  }
  return out.str();
}

TrackTable parse_track_csv(const std::string& text, const std::string& source) {
  TrackTable table;
  std::vector<std::pair<std::size_t, std::string>> comments;
  const auto records = split_csv(text, source, comments);
  for (const auto& [line, c] : comments) {
    const auto eq = c.find('=');
    if (eq == std::string::npos)
      throw InputError(ErrorKind::bad_format, Location{source, line, 0, {}},
                       "expected a '# key = value' setting line");
    table.settings.emplace_back(trim(c.substr(1, eq - 1)), trim(c.substr(eq + 1)));
  }
  if (records.empty())
    throw InputError(ErrorKind::bad_format, Location{source, 0, 0, {}},
                     "no header line (expected a radmode track table)");
  const auto& header = records.front().fields;
  const auto where = [&](std::size_t line, std::size_t col) {
    return Location{source, line, col + 1, col < header.size() ? header[col] : std::string()};
  };
  // Layout: index, file, metadata..., status, ..., sigma2_0, period_d_*, tail.
  const auto status_at = std::find(header.begin(), header.end(), "status");
  if (header.size() < 2 || header[0] != "index" || header[1] != "file" || status_at == header.end())
    throw InputError(ErrorKind::bad_format, Location{source, records.front().line, 0, {}},
                     "header does not start with index,file and contain status (expected a "
                     "radmode track table)");
  const auto meta_begin = std::size_t{2};
  const auto meta_end = static_cast<std::size_t>(status_at - header.begin());
  std::vector<std::string> meta_keys;
  for (std::size_t c = meta_begin; c < meta_end; ++c) meta_keys.push_back(meta_key_of_column(header[c]));
  int count = 0;
  while (std::find(header.begin(), header.end(), period_prefix + std::to_string(count)) !=
         header.end())
    ++count;
  table.count = count;
  if (count < 1)
    throw InputError(ErrorKind::bad_format, Location{source, records.front().line, 0, {}},
                     "no period_d_0 column (expected a radmode track table)");
  // The header must be exactly what format_track_csv writes for these keys and count.
  {
    std::vector<std::string> expected = head_columns();
    for (const auto& key : meta_keys) expected.push_back(meta_column_name(key));
    expected.insert(expected.end(), middle_columns().begin(), middle_columns().end());
    for (int k = 0; k < count; ++k) expected.push_back(period_prefix + std::to_string(k));
    expected.insert(expected.end(), tail_columns().begin(), tail_columns().end());
    if (expected != header)
      throw InputError(ErrorKind::bad_format, Location{source, records.front().line, 0, {}},
                       "unexpected header (expected the columns radmode track writes)");
  }
  for (std::size_t r = 1; r < records.size(); ++r) {
    const auto& rec = records[r];
    if (rec.fields.size() == 1 && rec.fields[0].empty()) continue; // blank line
    if (rec.fields.size() != header.size())
      throw InputError(ErrorKind::bad_format, Location{source, rec.line, 0, {}},
                       "expected " + std::to_string(header.size()) + " fields, found " +
                           std::to_string(rec.fields.size()));
    const auto& f = rec.fields;
    std::size_t c = 0;
    const auto number = [&](std::size_t col) -> std::optional<double> {
      if (f[col].empty()) return std::nullopt;
      auto x = parse_double(f[col]);
      if (!x) throw InputError(ErrorKind::bad_number, where(rec.line, col), "expected a number, found '" + f[col] + "'");
      return x;
    };
    TrackRow row;
    {
      const auto idx = number(c);
      if (!idx || *idx < 0 || *idx != std::floor(*idx) || *idx > 1e15)
        throw InputError(ErrorKind::bad_number, where(rec.line, c), "expected a whole model index >= 0");
      row.index = static_cast<std::size_t>(*idx);
    }
    row.file = f[++c];
    for (std::size_t m = 0; m < meta_keys.size(); ++m)
      if (!f[meta_begin + m].empty()) row.metadata.emplace_back(meta_keys[m], f[meta_begin + m]);
    c = meta_end;
    row.status = f[c++];
    row.message = f[c++];
    row.mass_g = number(c++);
    row.radius_cm = number(c++);
    row.t_dyn_s = number(c++);
    row.gamma1_pressure_weighted = number(c++);
    row.sigma2_0 = number(c++);
    for (int k = 0; k < count; ++k) row.period_d.push_back(number(c++));
    row.p1_over_p0 = number(c++);
    row.q_d_0 = number(c++);
    if (f[c] == "true") row.stable = true;
    else if (f[c] == "false") row.stable = false;
    else if (!f[c].empty())
      throw InputError(ErrorKind::bad_format, where(rec.line, c), "expected true, false or empty");
    ++c;
    row.growth_time_s = number(c++);
    row.verdict_pn = f[c++];
    table.rows.push_back(std::move(row));
  }
  return table;
}

TrackTable join_track_tables(const std::vector<std::pair<std::string, TrackTable>>& shards) {
  if (shards.empty()) throw UsageError("join: expected at least one shard table");
  const auto without_shard = [](std::vector<std::pair<std::string, std::string>> s) {
    s.erase(std::remove_if(s.begin(), s.end(), [](const auto& kv) { return kv.first == "shard"; }),
            s.end());
    return s;
  };
  TrackTable out;
  out.settings = without_shard(shards.front().second.settings);
  out.count = shards.front().second.count;
  for (const auto& [name, t] : shards) {
    if (without_shard(t.settings) != out.settings || t.count != out.count)
      throw InputError(ErrorKind::bad_format, Location{name, 0, 0, {}},
                       "settings or mode count differ from " + shards.front().first +
                           " (expected shards of one run)");
    out.rows.insert(out.rows.end(), t.rows.begin(), t.rows.end());
  }
  std::stable_sort(out.rows.begin(), out.rows.end(),
                   [](const TrackRow& a, const TrackRow& b) { return a.index < b.index; });
  std::size_t expected_total = out.rows.size();
  for (const auto& [k, v] : out.settings)
    if (k == "models") {
      const auto n = parse_double(v);
      if (!n || *n < 0)
        throw InputError(ErrorKind::bad_format, Location{shards.front().first, 0, 0, {}},
                         "setting 'models' is not a count: '" + v + "'");
      expected_total = static_cast<std::size_t>(*n);
    }
  for (std::size_t i = 0; i < out.rows.size(); ++i)
    if (out.rows[i].index != i)
      throw InputError(ErrorKind::bad_format, Location{shards.front().first, 0, 0, {}},
                       (out.rows[i].index < i ? "model index " + std::to_string(out.rows[i].index) +
                                                    " appears twice"
                                              : "model index " + std::to_string(i) +
                                                    " is missing (a shard not given?)"));
  if (out.rows.size() != expected_total)
    throw InputError(ErrorKind::bad_format, Location{shards.front().first, 0, 0, {}},
                     "the shards hold " + std::to_string(out.rows.size()) + " of " +
                         std::to_string(expected_total) + " models (a shard not given?)");
  return out;
}

// ---- along the track --------------------------------------------------------------------

const std::vector<AgeKey>& age_keys() {
  static const std::vector<AgeKey> keys{
      {"age_yr", 1.0}, {"age", 1.0}, {"age_myr", 1e6}, {"age_gyr", 1e9}};
  return keys;
}

TrackSummary summarize_track(const std::vector<TrackRow>& rows, int count) {
  TrackSummary s;
  s.models = rows.size();
  s.failed = static_cast<std::size_t>(
      std::count_if(rows.begin(), rows.end(), [](const TrackRow& r) { return !r.ok(); }));

  // Ages: one key that parses in every ok row.
  double unit = 0;
  const bool any_ok = std::any_of(rows.begin(), rows.end(), [](const TrackRow& r) { return r.ok(); });
  for (const auto& ak : age_keys()) {
    if (!any_ok) break;
    const bool all = std::all_of(rows.begin(), rows.end(), [&](const TrackRow& r) {
      return !r.ok() || parse_double(r.meta(ak.key)).has_value();
    });
    if (all) {
      s.age_key = ak.key;
      unit = ak.years;
      break;
    }
  }
  const auto age_of = [&](const TrackRow& r) -> std::optional<double> {
    if (s.age_key.empty()) return std::nullopt;
    auto a = parse_double(r.meta(s.age_key));
    if (a) *a *= unit;
    return a;
  };

  const auto crossings = [&](const std::string& quantity, auto value, double threshold,
                             const char* down, const char* up) {
    const TrackRow* prev = nullptr;
    double prev_v = 0;
    for (const auto& r : rows) {
      const std::optional<double> v = value(r);
      if (!v) continue;
      if (prev && ((prev_v - threshold < 0) != (*v - threshold < 0))) {
        TrackCrossing c;
        c.quantity = quantity;
        c.direction = prev_v - threshold >= 0 ? down : up;
        c.index_before = prev->index;
        c.index_after = r.index;
        const double f = (threshold - prev_v) / (*v - prev_v);
        c.at_index = static_cast<double>(prev->index) +
                     f * (static_cast<double>(r.index) - static_cast<double>(prev->index));
        const auto a0 = age_of(*prev), a1 = age_of(r);
        if (a0 && a1) c.at_age_yr = *a0 + f * (*a1 - *a0);
        s.crossings.push_back(c);
      }
      prev = &r;
      prev_v = *v;
    }
  };
  crossings("sigma2_0", [](const TrackRow& r) { return r.sigma2_0; }, 0.0, "stable_to_unstable",
            "unstable_to_stable");
  crossings("gamma1_pressure_weighted",
            [](const TrackRow& r) { return r.gamma1_pressure_weighted; }, 4.0 / 3.0,
            "falls_below_4/3", "rises_above_4/3");
  {
    const TrackRow* prev = nullptr;
    for (const auto& r : rows) {
      if (r.verdict_pn.empty()) continue;
      if (prev && prev->verdict_pn != r.verdict_pn) {
        TrackCrossing c;
        c.quantity = "verdict_pn";
        c.direction = prev->verdict_pn + "_to_" + r.verdict_pn;
        c.index_before = prev->index;
        c.index_after = r.index;
        s.crossings.push_back(c);
      }
      prev = &r;
    }
  }
  std::stable_sort(s.crossings.begin(), s.crossings.end(),
                   [](const TrackCrossing& a, const TrackCrossing& b) {
                     return a.index_before < b.index_before;
                   });

  if (!s.age_key.empty()) {
    for (int k = 0; k < count; ++k) {
      const auto uk = static_cast<std::size_t>(k);
      const TrackRow* prev = nullptr;
      for (const auto& r : rows) {
        if (uk >= r.period_d.size() || !r.period_d[uk] || !age_of(r)) continue;
        if (prev) {
          const double t0 = *age_of(*prev), t1 = *age_of(r);
          if (t1 != t0) {
            PeriodRate pr;
            pr.order = k;
            pr.index_before = prev->index;
            pr.index_after = r.index;
            pr.age_mid_yr = 0.5 * (t0 + t1);
            pr.dperiod_dt_s_per_yr =
                (*r.period_d[uk] - *prev->period_d[uk]) * 86400.0 / (t1 - t0);
            s.rates.push_back(pr);
          }
        }
        prev = &r;
      }
    }
  }
  return s;
}

std::string format_track_json(const TrackTable& table, const TrackSummary& summary) {
  std::ostringstream out;
  JsonWriter j(out);
  j.begin_object();
  j.field("program", "radmode").field("version", version).field("command", "track");
  j.key("settings").begin_object();
  for (const auto& [k, v] : table.settings) j.field(k, v);
  j.end_object();
  const auto cols = track_columns(table);
  j.key("columns").begin_array();
  for (const auto& c : cols) j.value(c);
  j.end_array();
  // Column kinds: the metadata, status, message, file and verdict columns are strings,
  // index a whole number, stable a boolean, the rest numbers.
  const auto keys = metadata_columns(table.rows);
  const std::size_t first_number = 2 + keys.size() + 2; // after index, file, meta, status, message
  j.key("rows").begin_array();
  for (const auto& row : table.rows) {
    const auto cells = row_cells(row, keys, table.count);
    j.begin_object();
    for (std::size_t c = 0; c < cells.size(); ++c) {
      j.key(cols[c]);
      const bool is_string = c == 1 || (c >= 2 && c < first_number) || c + 1 == cells.size();
      if (c == 0) j.value(static_cast<unsigned long long>(row.index));
      else if (is_string) j.value(cells[c]);
      else if (cells[c].empty()) j.null();
      else if (cols[c] == "stable") j.value(cells[c] == "true");
      else j.value(*parse_double(cells[c]));
    }
    j.end_object();
  }
  j.end_array();
  j.key("summary").begin_object();
  j.field("models", static_cast<unsigned long long>(summary.models));
  j.field("failed", static_cast<unsigned long long>(summary.failed));
  j.key("age_key");
  if (summary.age_key.empty()) j.null();
  else j.value(summary.age_key);
  j.key("crossings").begin_array();
  for (const auto& c : summary.crossings) {
    j.begin_object();
    j.field("quantity", c.quantity).field("direction", c.direction);
    j.field("index_before", static_cast<unsigned long long>(c.index_before));
    j.field("index_after", static_cast<unsigned long long>(c.index_after));
    j.key("at_index");
    if (c.at_index) j.value(*c.at_index); else j.null();
    j.key("at_age_yr");
    if (c.at_age_yr) j.value(*c.at_age_yr); else j.null();
    j.end_object();
  }
  j.end_array();
  j.key("period_rates").begin_array();
  for (const auto& r : summary.rates) {
    j.begin_object();
    j.field("order", r.order);
    j.field("index_before", static_cast<unsigned long long>(r.index_before));
    j.field("index_after", static_cast<unsigned long long>(r.index_after));
    j.field("age_mid_yr", r.age_mid_yr);
    j.field("dperiod_dt_s_per_yr", r.dperiod_dt_s_per_yr);
    j.end_object();
  }
  j.end_array();
  j.end_object();
  j.end_object();
  out << '\n';
  return out.str();
}

std::string format_track_summary(const TrackSummary& s) {
  std::ostringstream out;
  char buf[160];
  out << "track: " << s.models << " model" << (s.models == 1 ? "" : "s") << ", " << s.failed
      << " failed; positions by "
      << (s.age_key.empty() ? std::string("model index (no age key in every model)")
                            : "age (metadata key " + s.age_key + ")")
      << '\n';
  double unit = 1;
  for (const auto& ak : age_keys())
    if (s.age_key == ak.key) unit = ak.years;
  struct Phrase {
    const char* quantity;
    const char* change;
    const char* none;
  };
  for (const Phrase& ph :
       {Phrase{"sigma2_0", "fundamental sigma^2 changes sign",
               "fundamental sigma^2: no sign change along the track"},
        Phrase{"gamma1_pressure_weighted", "pressure-weighted <Gamma1> crosses 4/3",
               "pressure-weighted <Gamma1>: does not cross 4/3 along the track"},
        Phrase{"verdict_pn", "post-Newtonian verdict flips",
               "post-Newtonian verdict: no change along the track"}}) {
    bool any = false;
    for (const auto& c : s.crossings) {
      if (c.quantity != ph.quantity) continue;
      any = true;
      out << "  " << ph.change << " (" << c.direction << ") between models " << c.index_before
          << " and " << c.index_after;
      if (c.at_age_yr) {
        std::snprintf(buf, sizeof buf, ": at %s = %.6g", s.age_key.c_str(), *c.at_age_yr / unit);
        out << buf;
      }
      if (c.at_index) {
        std::snprintf(buf, sizeof buf, "%s index %.4f", c.at_age_yr ? "," : ": at", *c.at_index);
        out << buf;
      }
      out << '\n';
    }
    if (!any) out << "  " << ph.none << '\n';
  }
  std::map<int, std::pair<double, double>> range;
  std::map<int, std::size_t> intervals;
  for (const auto& r : s.rates) {
    auto it = range.find(r.order);
    if (it == range.end()) range[r.order] = {r.dperiod_dt_s_per_yr, r.dperiod_dt_s_per_yr};
    else {
      it->second.first = std::min(it->second.first, r.dperiod_dt_s_per_yr);
      it->second.second = std::max(it->second.second, r.dperiod_dt_s_per_yr);
    }
    ++intervals[r.order];
  }
  for (const auto& [k, mm] : range) {
    std::snprintf(buf, sizeof buf, "  dPi/dt of order %d: %.4g .. %.4g s/yr over %zu intervals\n",
                  k, mm.first, mm.second, intervals[k]);
    out << buf;
  }
  return out.str();
}

} // namespace radmode
