#include "io/records_study.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <chrono>
#include <memory>
#include <vector>

#include "core/fitting/evidence.hpp"
#include "core/fitting/model_selection.hpp"
#include "core/world/posterior_world.hpp"
#include "core/world/seeding.hpp"
#include "io/input_error.hpp"
#include "io/regular_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>

namespace dobudget::io {
namespace {

constexpr std::uint64_t fnv_offset = 0xcbf29ce484222325ULL, fnv_prime = 0x100000001b3ULL;

void fnv_bytes(std::uint64_t& h, const char* p, std::size_t n) {
  for (std::size_t i = 0; i < n; ++i) h = (h ^ static_cast<unsigned char>(p[i])) * fnv_prime;
}

// The digest reads the file through the checked open (regular files only: no pipe or device) and
// never more than the episodes file's bound, so a hostile path in a study cannot make it read
// forever or block.
void fnv_file(std::uint64_t& h, const std::filesystem::path& file) {
  struct stat info {};
  const int fd = open_regular_file(file, O_RDONLY, Links::follow, &info);
  if (fd < 0) throw InputError(file.string(), 0, "", "cannot be read");
  const auto close_fd = [fd] { ::close(fd); };
  if (static_cast<std::uintmax_t>(info.st_size) > max_episode_file_bytes) {
    close_fd();
    throw InputError(file.string(), 0, "",
                     fmt::format("holds {} bytes, more than the {} an episodes or codebook file may hold",
                                 static_cast<std::uintmax_t>(info.st_size), max_episode_file_bytes));
  }
  std::vector<char> buffer(std::size_t{1} << 20);
  std::uint64_t length = 0;
  std::uint64_t body = fnv_offset;
  for (;;) {
    const ssize_t n = ::read(fd, buffer.data(), buffer.size());
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) {
      close_fd();
      throw InputError(file.string(), 0, "", "cannot be read");
    }
    if (n == 0) break;
    length += static_cast<std::uint64_t>(n);
    if (length > max_episode_file_bytes) {  // grew while being read
      close_fd();
      throw InputError(file.string(), 0, "", "grew past the bound an episodes or codebook file may hold while being read");
    }
    fnv_bytes(body, buffer.data(), static_cast<std::size_t>(n));
  }
  close_fd();
  const std::string prefix = fmt::format("{}:{:016x};", length, body);
  fnv_bytes(h, prefix.data(), prefix.size());
}

}  // namespace

std::string records_digest(const std::filesystem::path& data, const std::filesystem::path& codebook) {
  std::uint64_t h = fnv_offset;
  fnv_file(h, data);
  if (!codebook.empty()) fnv_file(h, codebook);
  return fmt::format("{:016x}", h);
}

EpisodeRecords read_records(const std::filesystem::path& data, const std::filesystem::path& codebook) {
  if (codebook.empty()) return read_episodes(data, nullptr);
  const Codebook cb = read_codebook(codebook);
  return read_episodes(data, &cb);
}

RecordsFacts facts_of(const EpisodeRecords& r, const std::string& digest) {
  RecordsFacts f;
  f.digest = digest;
  f.logged_episodes = r.logged.count;
  f.pilot_episodes = r.pilot.count;
  for (const Dataset* d : {&r.logged, &r.pilot})
    for (int i = 0; i < d->count; ++i) f.longest_episode = std::max(f.longest_episode, d->length(i));
  f.observation_codes = static_cast<int>(r.codebook.observations.size());
  f.action_codes = static_cast<int>(r.codebook.actions.size());
  f.rewards = r.codebook.has_rewards();
  return f;
}

void prepare_records(Study& study, const StopToken& stop, void (*progress)(const std::string&)) {
  std::shared_ptr<const RecordsPosterior> posterior;
  for (Scenario& sc : study.scenarios) {
    EnvironmentSettings& e = sc.settings.environment;
    if (!e.records) continue;
    RecordsSettings& r = *e.records;
    if (!posterior) {
      const std::string digest = records_digest(r.data, r.codebook);
      if (digest != r.digest)
        throw InputError(r.data, 0, "",
                         fmt::format("the records changed since the study was read or resolved (digest {}, now {}); "
                                     "plan them as a new study",
                                     r.digest, digest));
      const EpisodeRecords rec = read_records(r.data, r.codebook);
      if (rec.logged.count != r.logged_episodes || rec.pilot.count != r.pilot_episodes)
        throw InputError(r.data, 0, "", "the records changed since the study was read or resolved (episode counts differ)");
      Pomdp shape;
      shape.actions = static_cast<int>(rec.codebook.actions.size());
      shape.observations = static_cast<int>(rec.codebook.observations.size());
      shape.horizon = std::max({1, rec.logged.horizon, rec.pilot.horizon});
      shape.rewards = rec.codebook.has_rewards()
                          ? Vector(Eigen::Map<const Vector>(rec.codebook.rewards.data(),
                                                            static_cast<Eigen::Index>(rec.codebook.rewards.size())))
                          : Vector::Zero(shape.observations);
      SelectionSettings sel;
      if (r.latent_states > 0) {
        sel.sizes = {r.latent_states};
        sel.folds = 0;  // a given size needs no held-out scores
      }
      if (progress)
        progress(fmt::format("fitting the records ({} logged, {} pilot episodes; latent states {})", rec.logged.count,
                             rec.pilot.count, r.latent_states > 0 ? std::to_string(r.latent_states) : "auto"));
      const auto t0 = std::chrono::steady_clock::now();
      const Selection s = select_latent_states(rec.logged, rec.pilot, shape, FitSettings{}, sel, study.seed, stop);
      const FitResult& best = s.best().fit;
      auto p = std::make_shared<RecordsPosterior>();
      p->fitted = best.model;
      p->fitted.rewards = shape.rewards;
      p->decision = best.decision;
      p->counts = combined(expected_counts_by_regime(best.model, best.decision, rec.logged, rec.pilot));
      posterior = p;
      if (progress)
        progress(fmt::format("fitted the records: {} latent states{} in {:.1f} s", s.best().latent_states,
                             r.latent_states > 0 ? "" : " (chosen by held-out log-likelihood)",
                             std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count()));
    }
    if (r.chosen_latent_states > 0 && r.chosen_latent_states != posterior->fitted.states)
      throw InputError(r.data, 0, "",
                       fmt::format("the fit of the records chose {} latent states where the study records {} (another "
                                   "version of dobudget?); plan them as a new study",
                                   posterior->fitted.states, r.chosen_latent_states));
    r.posterior = posterior;
    r.chosen_latent_states = posterior->fitted.states;
    e.family.states = posterior->fitted.states;
    if (r.fit_follows) sc.settings.fit.latent_states = posterior->fitted.states;
  }
}

}  // namespace dobudget::io
