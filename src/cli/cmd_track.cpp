// radmode track: many models (an evolution track or a grid) -> one table, in input order.
//
// Threads: --jobs N (default: all cores). Shards: --shard i/N takes every input with
// index mod N == i (0-based); `radmode join` merges the shard tables. With an MPI build
// (RADMODE_WITH_MPI) and more than one rank, the inputs are spread the same way over the
// ranks and rank 0 writes the table. Ctrl-C: in-flight models finish, nothing is written,
// exit status 130.
#include "common.hpp"
#include "registry.hpp"
#include "track_output.hpp"

#include "radmode/error.hpp"
#include "radmode/output.hpp"
#include "radmode/track.hpp"
#include "radmode/version.hpp"

#include <unistd.h>

#include <atomic>
#include <chrono>
#include <csignal>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <memory>

#ifdef RADMODE_WITH_MPI
// C interface only (the deprecated C++ bindings are not used).
#define OMPI_SKIP_MPICXX 1
#define MPICH_SKIP_MPICXX 1
#include <mpi.h>
#endif

namespace radmode::cli {
namespace {

/// Exit status after Ctrl-C (SIGINT): 128 + 2, the shell convention.
constexpr int exit_interrupted = 130;

struct TrackCliOptions {
  std::vector<std::string> models;
  std::string list;
  int count = 5;
  int jobs = 0;
  std::string output = "-";
  bool json = false;
  bool quiet = false;
  std::string shard;
  ModelInputOptions input;
};

std::atomic<bool> g_interrupted{false};
static_assert(std::atomic<bool>::is_always_lock_free, "signal flag must be lock-free");

extern "C" void on_sigint(int) {
  g_interrupted.store(true);
  std::signal(SIGINT, SIG_DFL); // a second Ctrl-C ends the program at once
}

/// Installs the SIGINT handler for its lifetime.
class InterruptGuard {
public:
  InterruptGuard() {
    g_interrupted = false;
    m_previous = std::signal(SIGINT, on_sigint);
  }
  ~InterruptGuard() { std::signal(SIGINT, m_previous == SIG_ERR ? SIG_DFL : m_previous); }
  InterruptGuard(const InterruptGuard&) = delete;
  InterruptGuard& operator=(const InterruptGuard&) = delete;

private:
  void (*m_previous)(int) = SIG_DFL;
};

/// Progress on stderr: a live bar on a terminal, a plain line every few seconds otherwise.
class ProgressPrinter {
public:
  ProgressPrinter(bool enabled, const std::string& prefix)
      : m_enabled(enabled), m_tty(isatty(STDERR_FILENO) == 1), m_prefix(prefix),
        m_start(Clock::now()), m_last(m_start) {}

  void operator()(std::size_t done, std::size_t total) {
    if (!m_enabled || total == 0) return;
    const auto now = Clock::now();
    const double since_last = seconds(m_last, now);
    const bool final = done == total;
    if (m_tty ? (since_last < 0.1 && !final) : (since_last < plain_interval_s && !final)) return;
    if (final && m_final_printed) return;
    m_last = now;
    m_final_printed = final;
    const double elapsed = seconds(m_start, now);
    const double rate = elapsed > 0 ? static_cast<double>(done) / elapsed : 0;
    const double left = rate > 0 ? static_cast<double>(total - done) / rate : 0;
    char buf[200];
    if (m_tty) {
      constexpr int width = 30;
      const int filled = static_cast<int>(width * static_cast<double>(done) / static_cast<double>(total));
      std::string bar(static_cast<std::size_t>(filled), '#');
      bar.append(static_cast<std::size_t>(width - filled), '.');
      std::snprintf(buf, sizeof buf, "\r%s[%s] %zu/%zu models  %.0f/s  %s left ", m_prefix.c_str(),
                    bar.c_str(), done, total, rate, clock_text(left).c_str());
      std::cerr << buf << (final ? "\n" : "") << std::flush;
    } else {
      std::snprintf(buf, sizeof buf, "%s%zu/%zu models (%.0f%%), %.0f models/s, %s left\n",
                    m_prefix.c_str(), done, total,
                    100.0 * static_cast<double>(done) / static_cast<double>(total), rate,
                    clock_text(left).c_str());
      std::cerr << buf << std::flush;
    }
  }

  /// Ends a live bar that stopped before 100 % (interrupt).
  void abandon() {
    if (m_enabled && m_tty && !m_final_printed) std::cerr << '\n';
  }

private:
  using Clock = std::chrono::steady_clock;
  static constexpr double plain_interval_s = 5.0;
  static double seconds(Clock::time_point a, Clock::time_point b) {
    return std::chrono::duration<double>(b - a).count();
  }
  static std::string clock_text(double s) {
    const long t = static_cast<long>(s + 0.5);
    char buf[32];
    if (t >= 3600) std::snprintf(buf, sizeof buf, "%ld:%02ld:%02ld", t / 3600, t / 60 % 60, t % 60);
    else std::snprintf(buf, sizeof buf, "%ld:%02ld", t / 60, t % 60);
    return buf;
  }
  bool m_enabled, m_tty;
  std::string m_prefix;
  Clock::time_point m_start, m_last;
  bool m_final_printed = false;
};

/// Settings recorded at the top of the table: everything that changes the rows, nothing
/// that does not (thread count, rank count, output format).
std::vector<std::pair<std::string, std::string>> run_settings(const TrackCliOptions& o,
                                                              std::size_t total) {
  std::vector<std::pair<std::string, std::string>> s{
      {"program", std::string("radmode ") + version + " track"},
      {"count", std::to_string(o.count)},
      {"models", std::to_string(total)}};
  if (!o.input.columns.empty()) s.emplace_back("columns", o.input.columns);
  if (o.input.skip > 0) s.emplace_back("skip", std::to_string(o.input.skip));
  return s;
}

std::vector<std::string> input_paths(const TrackCliOptions& o) {
  std::vector<std::string> paths = o.models;
  if (!o.list.empty()) {
    const auto listed = read_model_list(o.list);
    paths.insert(paths.end(), listed.begin(), listed.end());
  }
  if (paths.empty()) throw UsageError("track: expected model files or --list FILE");
  return paths;
}

void check_output_dir(const std::string& output) {
  if (output == "-") return;
  namespace fs = std::filesystem;
  const fs::path dir = fs::path(output).parent_path();
  std::error_code ec;
  if (!dir.empty() && !fs::is_directory(dir, ec))
    throw Error(ErrorKind::io, output + ": the directory " + dir.string() + " does not exist");
}

struct Outcome {
  TrackTable table;
  bool cancelled = false;
  std::size_t done = 0, total = 0;
};

Outcome run_local(const TrackCliOptions& o, const TrackOptions& opts,
                  const std::vector<std::string>& all, const std::vector<std::size_t>& indices,
                  const std::string& progress_prefix, bool progress_on) {
  std::vector<std::string> mine;
  for (auto i : indices) mine.push_back(all[i]);
  ProgressPrinter progress(progress_on, progress_prefix);
  InterruptGuard guard;
  const ModelInputOptions input = o.input;
  const TrackRun run = run_track(
      mine, indices, [&input](const std::string& p) { return load_model(p, input); }, opts,
      [&progress](std::size_t d, std::size_t t) { progress(d, t); }, &g_interrupted);
  Outcome out;
  out.cancelled = run.cancelled || g_interrupted.load();
  if (out.cancelled) progress.abandon();
  out.done = run.rows.size();
  out.total = mine.size();
  out.table.settings = run_settings(o, all.size());
  out.table.count = o.count;
  out.table.rows = run.rows;
  return out;
}

int finish(const TrackCliOptions& o, const Outcome& r) {
  if (r.cancelled) {
    std::cerr << "radmode track: interrupted after " << r.done << " of " << r.total
              << " models; nothing written\n";
    return exit_interrupted;
  }
  return write_track_result(r.table, o.output, o.json, o.quiet, "track");
}

#ifdef RADMODE_WITH_MPI
/// Every rank evaluates the inputs with index mod size == rank; rank 0 gathers the rank
/// tables (as CSV text), joins them as `radmode join` does and writes the result.
int run_mpi(const TrackCliOptions& o, TrackOptions opts, int rank, int size,
            bool jobs_given) {
  const auto all = input_paths(o);
  if (!o.shard.empty()) throw UsageError("--shard cannot be combined with an MPI run of several ranks");
  if (!jobs_given) opts.jobs = 1; // one thread per rank unless asked otherwise
  opts.validate();
  if (rank == 0) check_output_dir(o.output);
  const auto indices = shard_indices(all.size(), rank, size);
  char prefix[64];
  std::snprintf(prefix, sizeof prefix, "radmode track (rank 0 of %d): ", size);
  Outcome mine = run_local(o, opts, all, indices, prefix, !o.quiet && rank == 0);

  int cancelled = mine.cancelled ? 1 : 0, any_cancelled = 0;
  MPI_Allreduce(&cancelled, &any_cancelled, 1, MPI_INT, MPI_MAX, MPI_COMM_WORLD);
  unsigned long long done = mine.done, all_done = 0;
  MPI_Reduce(&done, &all_done, 1, MPI_UNSIGNED_LONG_LONG, MPI_SUM, 0, MPI_COMM_WORLD);
  if (any_cancelled) {
    if (rank == 0)
      std::cerr << "radmode track: interrupted after " << all_done << " of " << all.size()
                << " models; nothing written\n";
    return exit_interrupted;
  }
  const std::string text = format_track_csv(mine.table);
  int length = static_cast<int>(text.size());
  std::vector<int> lengths(static_cast<std::size_t>(size)), offsets(static_cast<std::size_t>(size));
  MPI_Gather(&length, 1, MPI_INT, lengths.data(), 1, MPI_INT, 0, MPI_COMM_WORLD);
  std::string gathered;
  if (rank == 0) {
    int sum = 0;
    for (std::size_t i = 0; i < lengths.size(); ++i) {
      offsets[i] = sum;
      sum += lengths[i];
    }
    gathered.resize(static_cast<std::size_t>(sum));
  }
  MPI_Gatherv(text.data(), length, MPI_CHAR, gathered.data(), lengths.data(), offsets.data(),
              MPI_CHAR, 0, MPI_COMM_WORLD);
  if (rank != 0) return 0;
  std::vector<std::pair<std::string, TrackTable>> parts;
  for (std::size_t i = 0; i < lengths.size(); ++i) {
    const std::string name = "rank " + std::to_string(i);
    parts.emplace_back(name, parse_track_csv(gathered.substr(static_cast<std::size_t>(offsets[i]),
                                                             static_cast<std::size_t>(lengths[i])),
                                             name));
  }
  Outcome joined;
  joined.table = join_track_tables(parts);
  joined.done = joined.total = all.size();
  return finish(o, joined);
}
#endif

int run_threads(const TrackCliOptions& o, const TrackOptions& opts) {
  const auto all = input_paths(o);
  std::vector<std::size_t> indices;
  if (o.shard.empty()) {
    for (std::size_t i = 0; i < all.size(); ++i) indices.push_back(i);
  } else {
    const auto [i, n] = parse_shard(o.shard);
    indices = shard_indices(all.size(), i, n);
  }
  check_output_dir(o.output);
  Outcome r = run_local(o, opts, all, indices, "radmode track: ", !o.quiet);
  if (!o.shard.empty()) r.table.settings.emplace_back("shard", o.shard);
  return finish(o, r);
}

int run_track_command(const TrackCliOptions& o, bool jobs_given) {
  TrackOptions opts;
  opts.count = o.count;
  opts.jobs = o.jobs;
  opts.validate();
  if (!o.shard.empty()) parse_shard(o.shard); // report a bad --shard before any work
  keep_freed_memory();
#ifdef RADMODE_WITH_MPI
  int initialized = 0;
  MPI_Initialized(&initialized);
  if (!initialized) MPI_Init(nullptr, nullptr);
  int rank = 0, size = 1;
  MPI_Comm_rank(MPI_COMM_WORLD, &rank);
  MPI_Comm_size(MPI_COMM_WORLD, &size);
  int status = 0;
  try {
    status = size > 1 ? run_mpi(o, opts, rank, size, jobs_given) : run_threads(o, opts);
  } catch (const Error& e) {
    if (size > 1) {
      std::cerr << "radmode: error (rank " << rank << "): " << e.what() << '\n';
      MPI_Abort(MPI_COMM_WORLD, e.exit_code());
    }
    MPI_Finalize();
    throw;
  }
  MPI_Finalize();
  return status;
#else
  (void)jobs_given;
  return run_threads(o, opts);
#endif
}

const bool registered = register_command(
    {"track", 60, [](CLI::App& app) -> std::pair<CLI::App*, RunFn> {
       auto o = std::make_shared<TrackCliOptions>();
       auto* sub = app.add_subcommand(
           "track", "Run many models (an evolution track or a grid) into one table, one row per "
                    "model in input order; summary of stability changes along the track");
       sub->add_option("models", o->models, "Model tables, in track order")->type_name("MODEL");
       sub->add_option("--list", o->list,
                       "File naming the models, one path per line (# comments; relative paths "
                       "are relative to the list file's directory); after any MODEL arguments")
           ->type_name("FILE");
       sub->add_option("-k,--count", o->count, "Modes per model (1..50)")->type_name("K");
       auto* jobs = sub->add_option("-j,--jobs", o->jobs, "Worker threads (default: all cores)")
                        ->type_name("N");
       sub->add_option("-o,--output", o->output,
                       "Write the table here (temporary name, renamed when complete); "
                       "- = standard output")
           ->type_name("FILE");
       sub->add_flag("--json", o->json, "Write JSON (rows and the along-track summary)");
       sub->add_flag("-q,--quiet", o->quiet, "No progress and no summary on standard error (the count of failed models is still printed)");
       sub->add_option("--shard", o->shard,
                       "Take only the inputs with index mod N == i (0-based i of N); merge the "
                       "shard tables with `radmode join`")
           ->type_name("i/N");
       add_model_input_options(sub, o->input);
       return {sub, [o, jobs] { return run_track_command(*o, jobs->count() > 0); }};
     }});

} // namespace
} // namespace radmode::cli
