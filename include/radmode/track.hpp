#pragma once
// Evolution tracks and grids: many models, one table.
//
// run_track() evaluates a list of model files on a pool of std::threads and returns one
// TrackRow per input, in input order. Every row is computed independently of the others and
// of the thread that computed it, so the table is byte-identical for any thread count, any
// shard split (see shard_indices / join_track_tables) and any MPI layout.
//
// Per model: load (a caller-supplied function, so the CLI's column mapping applies) →
// diagnostics (mass, radius, t_dyn, pressure-weighted <Gamma1>, post-Newtonian verdict) →
// solve_modes(count) → derived quantities (periods in days, P1/P0, Q of the fundamental).
// Bad input or a failed solve never stops the run: the row carries the failure class in
// `status` (error_kind_name(), or the numerical status) and the reason in `message`.
//
// Units in the table: mass_g [g], radius_cm [cm], t_dyn_s [s], periods [d], Q_d_0 [d],
// growth_time_s [s]; sigma2_0 = omega0^2 R^3/(G M) (dimensionless).
//
// Along the track (summarize_track): sign changes of sigma2_0, crossings of <Gamma1> = 4/3,
// flips of the post-Newtonian verdict (linear interpolation in age when every usable row has
// an age, else in model index), and the period change rate dPi/dt of each radial order in
// seconds per year.
//
// The core never prints: progress goes through a callback, invoked from the calling thread.

#include "radmode/eigensolve.hpp"
#include "radmode/model.hpp"

#include <atomic>
#include <cstddef>
#include <functional>
#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace radmode {

/// One row of a track table: one input model.
struct TrackRow {
  std::size_t index = 0; ///< 0-based position in the full input list
  std::string file;      ///< path as opened
  /// `# key = value` metadata of the model in file order. An empty value counts as absent.
  std::vector<std::pair<std::string, std::string>> metadata;
  std::string status = "ok"; ///< "ok", error_kind_name() of an input error, or a numerical status
  std::string message;       ///< why the row is not "ok" (empty when ok)

  std::optional<double> mass_g;
  std::optional<double> radius_cm;
  std::optional<double> t_dyn_s;                  ///< (G mean rho)^(-1/2)
  std::optional<double> gamma1_pressure_weighted; ///< integral Gamma1 P dV / integral P dV
  std::optional<double> sigma2_0;                 ///< omega0^2 R^3 / (G M) of the fundamental
  /// period_d[k]: period in days of radial order k (empty when omega_k^2 <= 0, when the mode
  /// was not found, or when its order could not be established).
  std::vector<std::optional<double>> period_d;
  std::optional<double> p1_over_p0;    ///< Pi_1 / Pi_0 (both periods present)
  std::optional<double> q_d_0;         ///< pulsation constant of the fundamental [d]
  std::optional<bool> stable;          ///< fundamental omega^2 >= 0
  std::optional<double> growth_time_s; ///< e-folding time 1/sqrt(-omega0^2) when unstable [s]
  std::string verdict_pn;              ///< "stable" / "unstable" (first post-Newtonian order), or ""

  bool ok() const { return status == "ok"; }
  /// Metadata value, empty when absent.
  std::string meta(const std::string& key) const;
};

struct TrackOptions {
  int count = 5;  ///< modes per model, 1..50
  int jobs = 0;   ///< worker threads; 0 = std::thread::hardware_concurrency()
  SolveOptions solve; ///< count is overridden by `count`

  /// Throws UsageError naming the option, its value and the allowed range.
  void validate() const;
  /// jobs with 0 resolved to the hardware concurrency (at least 1).
  int effective_jobs() const;
};

/// Evaluates one model. Never throws for bad numbers in the result: problems become the
/// row's status and message. (Throws only for invalid options.)
TrackRow evaluate_model(const StellarModel& model, const TrackOptions& options);

/// Reads one model file (the CLI passes its configured table reader).
using ModelLoader = std::function<StellarModel(const std::string& path)>;

/// Called from the thread that called run_track with (models finished, models in the run).
using TrackProgress = std::function<void(std::size_t done, std::size_t total)>;

struct TrackRun {
  std::vector<TrackRow> rows; ///< input order; incomplete rows dropped when cancelled
  bool cancelled = false;     ///< `stop` was raised before every model was done
  std::size_t failed() const; ///< rows whose status is not "ok"
};

/// Runs `task(i)` for i in [0, n) on `jobs` threads (each i exactly once, in increasing
/// order of start). Stops handing out new indices once *stop becomes true (tasks already
/// started finish); returns the number of tasks completed. `progress` (may be empty) is
/// called from the calling thread about every `progress_interval_s` and once at the end.
/// An exception escaping a task is rethrown here after all threads have joined.
std::size_t run_parallel(std::size_t n, int jobs, const std::function<void(std::size_t)>& task,
                         const TrackProgress& progress = {},
                         const std::atomic<bool>* stop = nullptr,
                         double progress_interval_s = 0.2);

/// Computes the row of one model file (may throw; run_rows turns exceptions into rows).
using RowFunction = std::function<TrackRow(const std::string& path)>;

/// The runner behind run_track: rows[k] = row_for(paths[k]) with index indices[k] (k when
/// `indices` is empty), on `jobs` threads. An Error becomes status error_kind_name(kind) with
/// its message; any other exception status "internal".
TrackRun run_rows(const std::vector<std::string>& paths, const std::vector<std::size_t>& indices,
                  const RowFunction& row_for, int jobs, const TrackProgress& progress = {},
                  const std::atomic<bool>* stop = nullptr);

/// Evaluates `paths[k]` (whose position in the full input list is `indices[k]`; pass an
/// empty `indices` for 0, 1, 2, ...) with `load` + evaluate_model on options.jobs threads.
/// Every failure becomes a row (status/message); the run goes on.
TrackRun run_track(const std::vector<std::string>& paths, const std::vector<std::size_t>& indices,
                   const ModelLoader& load, const TrackOptions& options,
                   const TrackProgress& progress = {}, const std::atomic<bool>* stop = nullptr);

/// Allocator setting for a batch of models in one process: memory freed after a model is kept
/// for the next one instead of being returned to the system and faulted in again (with glibc:
/// mallopt M_MMAP_THRESHOLD 32 MiB, M_TRIM_THRESHOLD 64 MiB, i.e. up to 64 MiB of free memory
/// kept per allocator arena; no effect with other C libraries). Process-wide and permanent;
/// run_track does not call it: `radmode track` and the track benchmark do.
/// (tests/bench/bench_track: page faults per 2,000-point model fell from ~28 to ~2 on one
/// thread; threads other than the main one were not affected.)
void keep_freed_memory() noexcept;

/// The deterministic slice of an input list of `total` entries taken by shard `shard` of
/// `shards` (0-based): every index i with i mod shards == shard, in increasing order.
std::vector<std::size_t> shard_indices(std::size_t total, int shard, int shards);

/// Parses "i/N" (0 <= i < N). Throws UsageError naming `option` otherwise.
std::pair<int, int> parse_shard(const std::string& text, const std::string& option = "--shard");

/// Reads a list file: one model path per line; blank lines and lines starting with '#'
/// (after leading blanks) are skipped; surrounding blanks are trimmed; a relative path is
/// taken relative to the list file's directory. Throws Error(io) / InputError(bad_format).
std::vector<std::string> read_model_list(const std::string& list_path);

// ---- Tables --------------------------------------------------------------------------

/// Everything a track table file holds. `settings` are `# key = value` lines written at the
/// top of the CSV (and as "settings" in JSON): program version, count, models (total input
/// count), shard (only in a shard's table) and any run settings the caller adds. Thread
/// counts are never recorded, so output does not depend on them.
struct TrackTable {
  std::vector<std::pair<std::string, std::string>> settings;
  int count = 5; ///< period columns
  std::vector<TrackRow> rows;
};

/// Metadata keys of all rows (non-empty values only), in first-seen order (rows in order,
/// keys of a row in file order).
std::vector<std::string> metadata_columns(const std::vector<TrackRow>& rows);

/// Column names: index, file, metadata keys, status, message, mass_g, radius_cm, t_dyn_s,
/// gamma1_pressure_weighted, sigma2_0, period_d_0..period_d_{count-1}, P1_over_P0, Q_d_0,
/// stable, growth_time_s, verdict_pn. Throws UsageError if a metadata key collides with a
/// fixed column name or the row count of period columns differs from `count`.
std::vector<std::string> track_columns(const TrackTable& table);

/// CSV (RFC 4180 quoting, '\n' line ends) preceded by `# key = value` setting lines.
/// Numbers use the shortest text that reads back to the same double; absent values are
/// empty fields (never NaN); stable is "true"/"false".
std::string format_track_csv(const TrackTable& table);

/// Parses what format_track_csv wrote (`source` names the file in errors). Throws
/// InputError(bad_format / bad_number) with file and line.
TrackTable parse_track_csv(const std::string& text, const std::string& source);

/// Merges shard tables of one run into the table a single run writes: checks that every
/// shard has the same settings (apart from "shard") and count, that no index repeats and
/// that the indices cover 0 .. models-1; then orders rows by index and drops "shard".
/// Throws InputError(bad_format) naming the shard and the problem.
TrackTable join_track_tables(const std::vector<std::pair<std::string, TrackTable>>& shards);

// ---- Along the track -----------------------------------------------------------------

/// Metadata keys that count as an age, in order of preference, with their unit in years:
/// age_yr (yr), age (yr), age_myr (1e6 yr), age_gyr (1e9 yr).
struct AgeKey {
  const char* key;
  double years;
};
const std::vector<AgeKey>& age_keys();

/// A quantity changing sign between two neighbouring models (neighbours: consecutive rows
/// in which the quantity is present).
struct TrackCrossing {
  std::string quantity;   ///< "sigma2_0", "gamma1_pressure_weighted" (crossing 4/3), "verdict_pn"
  std::string direction;  ///< "stable_to_unstable" or "unstable_to_stable"
  std::size_t index_before = 0, index_after = 0; ///< TrackRow::index of the two neighbours
  /// Linear interpolation of the zero of (quantity - threshold) in model index, and in age
  /// [yr] when the track has ages; the verdict is not interpolated (both empty).
  std::optional<double> at_index;
  std::optional<double> at_age_yr;
};

/// Period change of radial order k between two neighbouring models (both periods present).
struct PeriodRate {
  int order = 0;
  std::size_t index_before = 0, index_after = 0;
  double age_mid_yr = 0;                ///< mean age of the two models [yr]
  double dperiod_dt_s_per_yr = 0;       ///< (Pi_after - Pi_before) / (age_after - age_before)
};

struct TrackSummary {
  std::size_t models = 0, failed = 0;
  std::string age_key;                ///< the metadata key used for ages; empty = by index
  std::vector<TrackCrossing> crossings; ///< in track order
  std::vector<PeriodRate> rates;        ///< only with ages; by order, then track order
};

/// Sign changes, crossings and period rates along the rows (in row order). Ages are used
/// when one age key (age_keys()) parses as a finite number in every row that is "ok".
TrackSummary summarize_track(const std::vector<TrackRow>& rows, int count);

/// JSON document: {"program", "version", "settings", "columns", "rows": [{column: value}],
/// "summary"}; absent values are null.
std::string format_track_json(const TrackTable& table, const TrackSummary& summary);

/// Plain-text summary (a few lines) for people.
std::string format_track_summary(const TrackSummary& summary);

} // namespace radmode
