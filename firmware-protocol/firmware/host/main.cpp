// The reference firmware on a PC: the same core as on a board, with the HAL over a tty (argv[1], e.g. one
// end of a socat pseudo-terminal pair) or stdin/stdout, and the tiny plant in plant.cpp standing in for the
// motor and sensors. Debug lines (every ESC change, every state transition) go to stderr with the device
// clock, so a test can see what the "ESC" received without trusting the protocol port.
//
//   ductbench-fw-host [--sps 10|80] [--boot power|reset] [--ceiling 0.800] [TTY]

#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <time.h>
#include <unistd.h>

#include "../core/firmware.h"
#include "plant.h"

namespace {

volatile sig_atomic_t g_stop = 0;
void onSignal(int) { g_stop = 1; }

uint64_t monoUs() {
  timespec ts;
  clock_gettime(CLOCK_MONOTONIC, &ts);
  return (uint64_t)ts.tv_sec * 1000000u + (uint64_t)ts.tv_nsec / 1000u;
}

class HostHal : public db::Hal {
 public:
  HostHal(int in, int out, host::Plant& plant) : in_(in), out_(out), plant_(plant), start_(monoUs()) {}

  uint32_t micros() override { return (uint32_t)(monoUs() - start_); }
  size_t read(uint8_t* buf, size_t max) override {
    ssize_t n = ::read(in_, buf, max);
    if (n > 0) return (size_t)n;
    if (n == 0 || (errno != EAGAIN && errno != EWOULDBLOCK && errno != EINTR)) closed = true;
    return 0;
  }
  size_t writeRoom() override { return 4096; }
  void write(const uint8_t* buf, size_t n) override {
    while (n > 0) {
      ssize_t w = ::write(out_, buf, n);
      if (w > 0) {
        buf += w;
        n -= (size_t)w;
        continue;
      }
      if (w < 0 && errno == EINTR) continue;
      // Nobody is reading (the host is gone): a real UART would drop the bytes too.
      if (w < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) {
        dropped += n;
        return;
      }
      closed = true;
      return;
    }
  }
  void escWrite(uint16_t pulseUs) override { plant_.setPulse(pulseUs); }
  bool loadCellRead(int32_t* counts) override { return plant_.conversion(micros(), counts); }
  uint16_t analogRead(db::AnalogInput input) override {
    switch (input) {
      case db::AIN_VOLTAGE: return plant_.voltageCounts();
      case db::AIN_CURRENT: return plant_.currentCounts();
      case db::AIN_TEMP: return plant_.thermistorCounts();
    }
    return 0;
  }
  void rpmRead(uint32_t* count, uint32_t* lastEdgeUs) override { plant_.rpmPulses(count, lastEdgeUs); }
  void watchdogKick() override {}
  void debug(const char* text) override {
    fprintf(stderr, "fwhost %s\n", text);
    fflush(stderr);
  }

  bool closed = false;
  size_t dropped = 0;

 private:
  int in_, out_;
  host::Plant& plant_;
  uint64_t start_;
};

int openTty(const char* path) {
  int fd = open(path, O_RDWR | O_NOCTTY | O_NONBLOCK);
  if (fd < 0) return -1;
  termios tio;
  if (tcgetattr(fd, &tio) == 0) {
    cfmakeraw(&tio);
    cfsetispeed(&tio, B115200);
    cfsetospeed(&tio, B115200);
    tcsetattr(fd, TCSANOW, &tio);
  }
  return fd;
}

void usage() { fprintf(stderr, "usage: ductbench-fw-host [--sps 10|80] [--boot power|reset] [--ceiling X] [TTY]\n"); }

}  // namespace

int main(int argc, char** argv) {
  db::Config cfg = db::defaultConfig();
  cfg.version = "1.0.0+host";
  db::BootCause cause = db::BOOT_POWER_ON;
  const char* tty = nullptr;
  for (int i = 1; i < argc; i++) {
    if (!strcmp(argv[i], "--sps") && i + 1 < argc) cfg.loadCellSps = (uint8_t)atoi(argv[++i]);
    else if (!strcmp(argv[i], "--boot") && i + 1 < argc) cause = !strcmp(argv[++i], "reset") ? db::BOOT_RESET : db::BOOT_POWER_ON;
    else if (!strcmp(argv[i], "--ceiling") && i + 1 < argc) cfg.ceiling = atof(argv[++i]);
    else if (argv[i][0] == '-') {
      usage();
      return 2;
    } else tty = argv[i];
  }
  const char* problem = db::validateConfig(cfg);
  if (problem) {
    fprintf(stderr, "fwhost configuration refused: %s\n", problem);
    return 2;
  }
  int in = 0, out = 1;
  if (tty) {
    in = out = openTty(tty);
    if (in < 0) {
      fprintf(stderr, "fwhost cannot open %s: %s\n", tty, strerror(errno));
      return 1;
    }
  } else {
    fcntl(0, F_SETFL, fcntl(0, F_GETFL) | O_NONBLOCK);
  }
  signal(SIGTERM, onSignal);
  signal(SIGINT, onSignal);
  signal(SIGPIPE, SIG_IGN);

  host::Plant plant(cfg);
  HostHal hal(in, out, plant);
  db::Firmware fw(hal, cfg);
  fprintf(stderr, "fwhost %s %s caps=%s on %s\n", cfg.name, cfg.version, fw.caps(), tty ? tty : "stdio");
  fw.boot(cause);
  uint32_t last = hal.micros();
  while (!g_stop && !hal.closed) {
    pollfd p = {in, POLLIN, 0};
    poll(&p, 1, 1);  // a 1 ms main loop, woken early by input
    uint32_t now = hal.micros();
    plant.step((double)(uint32_t)(now - last) * 1e-6, now);
    last = now;
    fw.poll();
  }
  // Whatever ended the process, the simulated ESC sees the stop pulse last, as a board's reset would give it.
  plant.setPulse(cfg.escStopUs);
  fprintf(stderr, "fwhost exit (%s), %zu bytes dropped while nobody read\n", g_stop ? "signal" : "port closed", hal.dropped);
  return 0;
}
