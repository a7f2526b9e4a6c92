// `tallyd serve` benchmark (not a test): runs the real binary as a child
// process, pushes a generated feed over TCP from this process on loopback,
// and measures
//   - sustained records/s through serve (first byte sent to the last record
//     counted by /state), against `tallyd replay` of the same records from a
//     file in the same session (the baseline: the ratio is what to compare);
//   - the delay from sending a count that must alert to its alert line being
//     in the alert log (p50, p99 over --spikes sends, one at a time).
//
//   build/serve_bench --tallyd build/tallyd [--records N] [--series S] [--spikes K]
#include <fcntl.h>
#include <netinet/in.h>
#include <signal.h>
#include <sys/socket.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <nlohmann/json.hpp>

#include "bounds/random.h"

namespace {

using Clock = std::chrono::steady_clock;

struct Args {
  std::string tallyd = "./tallyd";
  long records = 50000;
  long series = 50;
  long spikes = 200;
};

int connect_to(int port) {
  int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_port = htons(static_cast<std::uint16_t>(port));
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  if (::connect(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) != 0) {
    std::perror("connect");
    std::exit(1);
  }
  return fd;
}

void send_all(int fd, const std::string& s) {
  std::size_t off = 0;
  while (off < s.size()) {
    ssize_t n = ::send(fd, s.data() + off, s.size() - off, MSG_NOSIGNAL);
    if (n <= 0) {
      std::perror("send");
      std::exit(1);
    }
    off += static_cast<std::size_t>(n);
  }
}

std::string http_get(int port, const std::string& path) {
  int fd = connect_to(port);
  send_all(fd, "GET " + path + " HTTP/1.1\r\nHost: 127.0.0.1\r\n\r\n");
  std::string out;
  char buf[65536];
  for (ssize_t n; (n = ::read(fd, buf, sizeof buf)) > 0;) out.append(buf, static_cast<std::size_t>(n));
  ::close(fd);
  return out.substr(out.find("\r\n\r\n") + 4);
}

long records_seen(int status_port) {
  auto j = nlohmann::json::parse(http_get(status_port, "/state"));
  return j["records"].get<long>();
}

long file_size(const std::string& path) {
  struct stat st {};
  return ::stat(path.c_str(), &st) == 0 ? static_cast<long>(st.st_size) : 0;
}

}  // namespace

int main(int argc, char** argv) {
  Args a;
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string k = argv[i];
    if (k == "--tallyd") a.tallyd = argv[i + 1];
    else if (k == "--records") a.records = std::atol(argv[i + 1]);
    else if (k == "--series") a.series = std::atol(argv[i + 1]);
    else if (k == "--spikes") a.spikes = std::atol(argv[i + 1]);
  }
  char tmpl[] = "/tmp/tallyd-serve-bench-XXXXXX";
  const std::string dir = ::mkdtemp(tmpl);
  const std::string alerts = dir + "/alerts.jsonl", ports = dir + "/ports.txt", feed = dir + "/feed.csv";
  const std::string model = "[model]\nfamily = \"poisson\"\nmin_history = 20\nwindow = 500\n[alert]\nalpha = 0.001\n";
  std::ofstream(dir + "/replay.toml") << model;
  std::ofstream(dir + "/serve.toml") << model << "[[source]]\nkind = \"tcp\"\nname = \"push\"\n[output]\nalerts = \""
                                     << alerts << "\"\n[checkpoint]\npath = \"" << dir
                                     << "/state.ckpt\"\nevery = \"1h\"\n";

  // Steady Poisson counts (mean 5) every 10 minutes per series.
  tallyd::bounds::Rng rng(20261201);
  const long per_series = a.records / a.series;
  const long t0 = 1700000000;
  std::string body = "time,series,count,exposure\n";
  for (long i = 0; i < per_series; ++i)
    for (long s = 0; s < a.series; ++s)
      body += std::to_string(t0 + i * 600) + ",s" + std::to_string(s) + "," + std::to_string(rng.poisson(5.0)) + ",1\n";
  const long n = per_series * a.series;
  std::ofstream(feed) << body;

  // Baseline: replay of the same records from a file.
  const auto r0 = Clock::now();
  const std::string cmd = a.tallyd + " replay " + feed + " --config " + dir + "/replay.toml -q -a " + dir + "/replay.jsonl";
  if (std::system(cmd.c_str()) != 0) return 1;
  const double replay_s = std::chrono::duration<double>(Clock::now() - r0).count();

  pid_t pid = ::fork();
  if (pid == 0) {
    int null = ::open("/dev/null", O_WRONLY);
    ::dup2(null, 2);
    ::execl(a.tallyd.c_str(), a.tallyd.c_str(), "serve", "--config", (dir + "/serve.toml").c_str(), "--ports-file",
            ports.c_str(), static_cast<char*>(nullptr));
    std::_Exit(127);
  }
  int push_port = 0, status_port = 0;
  for (int i = 0; i < 2000 && status_port == 0; ++i) {
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
    std::ifstream in(ports);
    std::string name;
    int port = 0;
    while (in >> name >> port) (name == "push" ? push_port : status_port) = port;
  }
  if (status_port == 0) return 1;

  const auto s0 = Clock::now();
  int fd = connect_to(push_port);
  send_all(fd, body);
  std::vector<double> answers;  // seconds each /state took while the backlog was judged
  for (;;) {
    const auto q0 = Clock::now();
    const long seen = records_seen(status_port);
    answers.push_back(std::chrono::duration<double>(Clock::now() - q0).count());
    if (seen >= n) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  const double serve_s = std::chrono::duration<double>(Clock::now() - s0).count();
  std::sort(answers.begin(), answers.end());

  // Latency: a count of 60 (mean 5) after the feed, one series at a time.
  std::vector<double> delays;
  for (long k = 0; k < a.spikes; ++k) {
    const long before = file_size(alerts);
    const std::string line = std::to_string(t0 + (per_series + k / a.series) * 600) + ",s" +
                             std::to_string(k % a.series) + ",60,1\n";
    const auto t = Clock::now();
    send_all(fd, line);
    while (file_size(alerts) == before) {
      if (Clock::now() - t > std::chrono::seconds(10)) {
        std::fprintf(stderr, "no alert within 10 s for spike %ld\n", k);
        return 1;
      }
    }
    delays.push_back(std::chrono::duration<double>(Clock::now() - t).count());
  }
  ::close(fd);
  ::kill(pid, SIGTERM);
  ::waitpid(pid, nullptr, 0);
  std::sort(delays.begin(), delays.end());
  auto q = [&](double p) { return delays[static_cast<std::size_t>(p * static_cast<double>(delays.size() - 1))]; };
  std::printf("records %ld, series %ld\n", n, a.series);
  std::printf("replay (baseline): %.2f s, %.0f records/s\n", replay_s, static_cast<double>(n) / replay_s);
  std::printf("serve over TCP:    %.2f s, %.0f records/s (%.2f x replay)\n", serve_s, static_cast<double>(n) / serve_s,
              replay_s / serve_s);
  std::printf("/state answers during the backlog: %zu, median %.3f ms, longest %.1f ms\n", answers.size(),
              answers[answers.size() / 2] * 1e3, answers.back() * 1e3);
  std::printf("send-to-alert-written delay over %zu alerts: p50 %.3f ms, p99 %.3f ms\n", delays.size(), q(0.5) * 1e3,
              q(0.99) * 1e3);
  std::string rm = "rm -rf " + dir;
  return std::system(rm.c_str()) == 0 ? 0 : 1;
}
