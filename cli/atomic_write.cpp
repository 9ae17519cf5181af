#include "cli/atomic_write.h"

#include <fcntl.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstring>
#include <fstream>
#include <stdexcept>

namespace dropfit::cli {

namespace {

std::filesystem::path TemporaryPathFor(const std::filesystem::path& path) {
  static std::atomic<unsigned> counter{0};
  std::filesystem::path tmp = path;
  tmp += ".tmp-" + std::to_string(::getpid()) + "-" + std::to_string(counter++);
  return tmp;
}

void SyncFile(const std::filesystem::path& path) {
  const int fd = ::open(path.c_str(), O_RDONLY);
  if (fd >= 0) {
    ::fsync(fd);
    ::close(fd);
  }
}

}  // namespace

void WriteFileAtomically(const std::filesystem::path& path, const std::function<void(std::ostream&)>& writer) {
  const std::filesystem::path tmp = TemporaryPathFor(path);
  try {
    {
      std::ofstream out(tmp, std::ios::binary | std::ios::trunc);
      if (!out) {
        throw std::runtime_error("cannot write " + path.string() + ": " + std::strerror(errno));
      }
      writer(out);
      out.flush();
      if (!out) throw std::runtime_error("cannot write " + path.string() + ": write failed (disk full?)");
    }
    SyncFile(tmp);
    std::error_code ec;
    std::filesystem::rename(tmp, path, ec);
    if (ec) throw std::runtime_error("cannot replace " + path.string() + ": " + ec.message());
  } catch (...) {
    std::error_code ignored;
    std::filesystem::remove(tmp, ignored);
    throw;
  }
}

void WriteFileAtomically(const std::filesystem::path& path, const std::string& content) {
  WriteFileAtomically(path, [&](std::ostream& out) { out << content; });
}

}  // namespace dropfit::cli
