#include "media/files.h"

#include "media/frame_source.h"

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <opencv2/videoio.hpp>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <stdexcept>

namespace dropfit::media {

namespace fs = std::filesystem;

namespace {

constexpr const char* kImageExtensions[] = {".png", ".jpg", ".jpeg", ".bmp", ".tif", ".tiff", ".pgm", ".ppm"};
constexpr const char* kVideoExtensions[] = {".mp4", ".mov", ".avi", ".mkv", ".m4v", ".webm"};

std::string LowerExtension(const fs::path& path) {
  std::string ext = path.extension().string();
  std::transform(ext.begin(), ext.end(), ext.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  return ext;
}

void AddFileBytes(const fs::path& path, Fnv1a64& hash) {
  std::ifstream file(path, std::ios::binary);
  if (!file) throw std::runtime_error("cannot read " + path.string() + " to hash it");
  std::vector<char> buffer(1 << 16);
  while (file) {
    file.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    hash.Add(buffer.data(), static_cast<size_t>(file.gcount()));
  }
}

}  // namespace

bool IsImageFile(const fs::path& path) {
  const std::string ext = LowerExtension(path);
  return std::any_of(std::begin(kImageExtensions), std::end(kImageExtensions), [&](const char* e) { return ext == e; });
}

bool IsVideoFile(const fs::path& path) {
  const std::string ext = LowerExtension(path);
  return std::any_of(std::begin(kVideoExtensions), std::end(kVideoExtensions), [&](const char* e) { return ext == e; });
}

std::string ImageExtensionsText() {
  std::string text;
  for (const char* e : kImageExtensions) {
    if (!text.empty()) text += ", ";
    text += e;
  }
  return text;
}

cv::Mat ReadGreyImage(const fs::path& path, const std::string& role, std::string* note) {
  std::error_code ec;
  if (!fs::is_regular_file(path, ec)) {
    throw std::runtime_error(role + " " + path.string() + " does not exist or is not a file");
  }
  const auto undecodable = [&] {
    return std::runtime_error(
        role + " " + path.string() +
        " cannot be decoded as an image; give PNG, JPEG, TIFF or BMP files, a folder of them, or a video");
  };
  // Decoded once at its own depth: 8-bit grey as it is; 16-bit data scaled by its significant
  // bits (media/frame_source.h), not by 16 bits.
  cv::Mat image = cv::imread(path.string(), cv::IMREAD_ANYDEPTH | cv::IMREAD_GRAYSCALE);
  if (image.empty()) throw undecodable();
  if (image.depth() == CV_8U) return image;
  if (image.depth() == CV_16U) {
    double lo = 0, hi = 0;
    cv::minMaxLoc(image, &lo, &hi);
    const int bits = SignificantBits16(static_cast<int>(hi));
    cv::Mat grey;
    image.convertTo(grey, CV_8U, 255.0 / (std::ldexp(1.0, bits) - 1.0));
    if (note) *note = path.string() + ": " + Scaling16Note(bits, static_cast<int>(hi), 1);
    return grey;
  }
  // Other depths (floating point): OpenCV's own 8-bit grey conversion.
  cv::Mat grey = cv::imread(path.string(), cv::IMREAD_GRAYSCALE);
  if (grey.empty()) throw undecodable();
  return grey;
}

long VisitVideoFrames(const fs::path& video, const VideoFrameVisitor& visitor) {
  const std::string name = video.string();
  cv::VideoCapture cap(name);
  if (!cap.isOpened()) {
    throw std::runtime_error("video " + name + " cannot be opened (unknown format or damaged file)");
  }
  long frames = static_cast<long>(cap.get(cv::CAP_PROP_FRAME_COUNT));
  if (frames <= 0) {
    // The container does not say: count by grabbing, then reopen.
    frames = 0;
    while (cap.grab()) ++frames;
    cap.release();
    cap.open(name);
  }
  if (frames <= 0 || !cap.isOpened()) throw std::runtime_error("video " + name + " holds no frames");
  const std::vector<long> wanted = visitor.choose(frames);
  long index = 0, decoded = 0;
  cv::Mat frame, grey;
  for (long target : wanted) {
    while (index < target && cap.grab()) ++index;
    if (index != target || !cap.read(frame)) break;
    ++index;
    ++decoded;
    if (frame.channels() == 3)
      cv::cvtColor(frame, grey, cv::COLOR_BGR2GRAY);
    else if (frame.channels() == 4)
      cv::cvtColor(frame, grey, cv::COLOR_BGRA2GRAY);
    else
      grey = frame;
    if (grey.depth() != CV_8U) grey.convertTo(grey, CV_8U);
    visitor.visit(target, grey);
  }
  return decoded;
}

void Fnv1a64::Add(const void* data, size_t bytes) {
  const auto* p = static_cast<const unsigned char*>(data);
  for (size_t i = 0; i < bytes; ++i) h_ = (h_ ^ p[i]) * 0x100000001b3ULL;
}

std::string Fnv1a64::Hex() const {
  char text[17];
  std::snprintf(text, sizeof(text), "%016llx", static_cast<unsigned long long>(h_));
  return text;
}

std::string Fnv1a64Hex(const std::string& bytes) {
  Fnv1a64 h;
  h.Add(bytes);
  return h.Hex();
}

std::string Fnv1a64HexOfFile(const fs::path& path) {
  Fnv1a64 h;
  AddFileBytes(path, h);
  return h.Hex();
}

std::string InputFingerprint(const fs::path& path) {
  std::vector<fs::path> files;
  if (fs::is_directory(path)) {
    for (const auto& e : fs::directory_iterator(path)) {
      if (e.is_regular_file()) files.push_back(e.path());
    }
    std::sort(files.begin(), files.end());
  } else {
    files.push_back(path);
  }
  Fnv1a64 h;
  for (const fs::path& f : files) {
    h.Add(f.filename().string());
    std::ifstream in(f, std::ios::binary);
    std::vector<char> buf(1 << 16);
    while (in) {
      in.read(buf.data(), static_cast<std::streamsize>(buf.size()));
      h.Add(buf.data(), static_cast<size_t>(in.gcount()));
    }
  }
  return h.Hex();
}

}  // namespace dropfit::media
