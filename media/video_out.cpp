#include "media/video_out.h"

#include <opencv2/imgcodecs.hpp>
#include <opencv2/videoio.hpp>

#include <algorithm>
#include <cassert>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <numeric>
#include <sstream>
#include <stdexcept>

namespace dropfit::media {

namespace {

constexpr std::pair<VideoFormat, const char*> kFormats[] = {{VideoFormat::kMjpgAvi, "mjpg"},
                                                            {VideoFormat::kFfv1Mov, "ffv1"},
                                                            {VideoFormat::kH264Mp4, "h264"},
                                                            {VideoFormat::kPngFrames, "png"}};

// AVI 1.0 stops at 1 GiB (RIFF sizes are 32-bit and most readers expect the first RIFF below 1 GiB).
constexpr uint64_t kMaxAviBytes = uint64_t{1} << 30;

// Header layout sizes (Microsoft's AVI RIFF File Reference).
constexpr uint32_t kAvihBytes = 56, kStrhBytes = 56, kStrfBytes = 40;
constexpr uint32_t kStrlBytes = 4 + (8 + kStrhBytes) + (8 + kStrfBytes);
constexpr uint32_t kHdrlBytes = 4 + (8 + kAvihBytes) + (8 + kStrlBytes);
// RIFF header (12) + hdrl list (8 + kHdrlBytes) + movi list header (12).
constexpr long kMoviFourccOffset = 12 + 8 + kHdrlBytes + 8;

void CheckSize(cv::Size size) {
  if (size.width <= 0 || size.height <= 0) {
    throw std::invalid_argument("frame size " + std::to_string(size.width) + "x" + std::to_string(size.height) +
                                " is not positive");
  }
}

void CheckFrame(const cv::Mat& frame, cv::Size size) {
  if (frame.type() != CV_8UC1 || frame.size() != size) {
    std::ostringstream msg;
    msg << "frame of type " << frame.type() << " and size " << frame.cols << "x" << frame.rows
        << " given to a sink opened for 8-bit grey " << size.width << "x" << size.height;
    throw std::invalid_argument(msg.str());
  }
}

// Rate as dwRate/dwScale with enough precision for any fps.
std::pair<uint32_t, uint32_t> RateAndScale(double fps) {
  const double rounded = std::round(fps);
  if (std::abs(fps - rounded) < 1e-9 && rounded <= 4e9) return {static_cast<uint32_t>(rounded), 1};
  const uint32_t scale = 1000;
  return {static_cast<uint32_t>(std::llround(fps * scale)), scale};
}

class OpenCvSink final : public FrameSink {
 public:
  OpenCvSink(const std::filesystem::path& path, int fourcc, cv::Size size, double fps, const char* name)
      : path_(path), size_(size) {
    writer_.open(path.string(), cv::CAP_FFMPEG, fourcc, fps, size, false);
    if (!writer_.isOpened()) {
      throw std::runtime_error("cannot open '" + path.string() + "' for writing " + name +
                               " through OpenCV's FFmpeg backend; choose another --format (mjpg or png)");
    }
  }
  void Write(const cv::Mat& grey8) override {
    CheckFrame(grey8, size_);
    writer_.write(grey8);
    ++frames_;
  }
  void Close() override { writer_.release(); }
  int frames_written() const override { return frames_; }

 private:
  std::filesystem::path path_;
  cv::Size size_;
  cv::VideoWriter writer_;
  int frames_ = 0;
};

class PngSink final : public FrameSink {
 public:
  PngSink(const std::filesystem::path& folder, cv::Size size) : folder_(folder), size_(size) {
    std::error_code ec;
    std::filesystem::create_directories(folder, ec);
    if (ec || !std::filesystem::is_directory(folder)) {
      throw std::runtime_error("cannot create the frame folder '" + folder.string() + "': " + ec.message());
    }
  }
  void Write(const cv::Mat& grey8) override {
    CheckFrame(grey8, size_);
    char name[32];
    std::snprintf(name, sizeof name, "frame_%05d.png", frames_);
    const std::filesystem::path file = folder_ / name;
    // Compression level 1: PNG is lossless at any level; 1 is several times faster than the default.
    if (!cv::imwrite(file.string(), grey8, {cv::IMWRITE_PNG_COMPRESSION, 1})) {
      throw std::runtime_error("cannot write '" + file.string() + "'");
    }
    ++frames_;
  }
  void Close() override {}
  int frames_written() const override { return frames_; }

 private:
  std::filesystem::path folder_;
  cv::Size size_;
  int frames_ = 0;
};

void Put32(std::vector<uint8_t>& b, uint32_t v) {
  for (int i = 0; i < 4; ++i) b.push_back(static_cast<uint8_t>(v >> (8 * i)));
}
void Put16(std::vector<uint8_t>& b, uint16_t v) {
  b.push_back(static_cast<uint8_t>(v));
  b.push_back(static_cast<uint8_t>(v >> 8));
}
void PutFourcc(std::vector<uint8_t>& b, const char* f) { b.insert(b.end(), f, f + 4); }

}  // namespace

std::string ToString(VideoFormat format) {
  for (const auto& [value, name] : kFormats) {
    if (value == format) return name;
  }
  return "mjpg";
}

VideoFormat VideoFormatFromString(const std::string& text) {
  for (const auto& [value, name] : kFormats) {
    if (text == name) return value;
  }
  std::string valid;
  for (const auto& [value, name] : kFormats) valid += (valid.empty() ? "" : ", ") + std::string(name);
  throw std::invalid_argument("unknown video format '" + text + "'; valid: " + valid);
}

std::string FileExtension(VideoFormat format) {
  switch (format) {
    case VideoFormat::kMjpgAvi:
      return ".avi";
    case VideoFormat::kFfv1Mov:
      return ".mov";
    case VideoFormat::kH264Mp4:
      return ".mp4";
    case VideoFormat::kPngFrames:
      return "";
  }
  return "";
}

std::unique_ptr<FrameSink> OpenFrameSink(const std::filesystem::path& path, VideoFormat format, cv::Size frame_size,
                                         double container_fps, int jpeg_quality) {
  CheckSize(frame_size);
  if (!(container_fps > 0 && container_fps <= 1e6)) {
    throw std::invalid_argument("container frame rate " + std::to_string(container_fps) +
                                " frames/s is outside (0, 1e6]");
  }
  switch (format) {
    case VideoFormat::kMjpgAvi:
      return std::make_unique<MjpgAviWriter>(path, frame_size, container_fps, jpeg_quality);
    case VideoFormat::kFfv1Mov:
      return std::make_unique<OpenCvSink>(path, cv::VideoWriter::fourcc('F', 'F', 'V', '1'), frame_size, container_fps,
                                          "FFV1");
    case VideoFormat::kH264Mp4:
      return std::make_unique<OpenCvSink>(path, cv::VideoWriter::fourcc('a', 'v', 'c', '1'), frame_size, container_fps,
                                          "H.264");
    case VideoFormat::kPngFrames:
      return std::make_unique<PngSink>(path, frame_size);
  }
  throw std::invalid_argument("unknown video format");
}

MjpgAviWriter::MjpgAviWriter(const std::filesystem::path& path, cv::Size frame_size, double container_fps,
                             int jpeg_quality)
    : path_(path),
      size_(frame_size),
      fps_(container_fps),
      quality_(jpeg_quality),
      file_(std::fopen(path.string().c_str(), "wb"), &std::fclose) {
  CheckSize(frame_size);
  if (!(jpeg_quality >= 1 && jpeg_quality <= 100)) {
    throw std::invalid_argument("JPEG quality " + std::to_string(jpeg_quality) + " is outside 1..100");
  }
  if (!(container_fps > 0 && container_fps <= 1e6)) {
    throw std::invalid_argument("container frame rate " + std::to_string(container_fps) +
                                " frames/s is outside (0, 1e6]");
  }
  if (!file_) throw std::runtime_error("cannot create '" + path.string() + "': " + std::strerror(errno));
  // Placeholder headers; Close() rewrites them with the final sizes and counts.
  std::vector<uint8_t> zeros(static_cast<size_t>(kMoviFourccOffset + 4), 0);
  if (std::fwrite(zeros.data(), 1, zeros.size(), file_.get()) != zeros.size()) {
    throw std::runtime_error("cannot write '" + path.string() + "'");
  }
}

MjpgAviWriter::~MjpgAviWriter() {
  if (!closed_) {
    try {
      Close();
    } catch (...) {
      // Destructors must not throw; callers that care call Close() themselves.
    }
  }
}

void MjpgAviWriter::Write(const cv::Mat& grey8) {
  CheckFrame(grey8, size_);
  std::vector<uint8_t> jpeg;
  if (!cv::imencode(".jpg", grey8, jpeg, {cv::IMWRITE_JPEG_QUALITY, quality_})) {
    throw std::runtime_error("JPEG encoding failed for frame " + std::to_string(index_.size()) + " of '" +
                             path_.string() + "'");
  }
  WriteJpeg(jpeg);
}

void MjpgAviWriter::WriteJpeg(const std::vector<uint8_t>& jpeg) {
  if (closed_) throw std::runtime_error("'" + path_.string() + "' is already closed");
  const uint32_t size = static_cast<uint32_t>(jpeg.size());
  const uint32_t padded = size + (size & 1u);
  if (12 + 8 + kHdrlBytes + 8 + movi_bytes_ + 8 + padded + 8 + 16 * (index_.size() + 1) > kMaxAviBytes) {
    throw std::runtime_error("'" + path_.string() + "' would exceed the 1 GiB limit of an AVI 1.0 file after " +
                             std::to_string(index_.size()) + " frames; render fewer frames or use --format png");
  }
  std::vector<uint8_t> header;
  PutFourcc(header, "00dc");
  Put32(header, size);
  const uint8_t pad = 0;
  if (std::fwrite(header.data(), 1, 8, file_.get()) != 8 ||
      std::fwrite(jpeg.data(), 1, jpeg.size(), file_.get()) != jpeg.size() ||
      (padded != size && std::fwrite(&pad, 1, 1, file_.get()) != 1)) {
    throw std::runtime_error("cannot write frame " + std::to_string(index_.size()) + " to '" + path_.string() + "'");
  }
  index_.push_back({static_cast<uint32_t>(movi_bytes_), size});
  movi_bytes_ += 8 + padded;
  max_chunk_ = std::max(max_chunk_, size);
}

void MjpgAviWriter::Close() {
  if (closed_) return;
  closed_ = true;
  const uint32_t frames = static_cast<uint32_t>(index_.size());
  // idx1: one AVIOLDINDEX entry per chunk, flag AVIIF_KEYFRAME (0x10), offsets from 'movi'.
  std::vector<uint8_t> idx;
  PutFourcc(idx, "idx1");
  Put32(idx, 16 * frames);
  for (const IndexEntry& e : index_) {
    PutFourcc(idx, "00dc");
    Put32(idx, 0x10);
    Put32(idx, e.offset);
    Put32(idx, e.size);
  }
  if (std::fwrite(idx.data(), 1, idx.size(), file_.get()) != idx.size()) {
    throw std::runtime_error("cannot write the index of '" + path_.string() + "'");
  }
  const auto [rate, scale] = RateAndScale(fps_);
  const uint32_t w = static_cast<uint32_t>(size_.width), h = static_cast<uint32_t>(size_.height);
  std::vector<uint8_t> b;
  PutFourcc(b, "RIFF");
  Put32(b, static_cast<uint32_t>(4 + (8 + kHdrlBytes) + (8 + movi_bytes_) + idx.size()));
  PutFourcc(b, "AVI ");
  PutFourcc(b, "LIST");
  Put32(b, kHdrlBytes);
  PutFourcc(b, "hdrl");
  // AVIMAINHEADER
  PutFourcc(b, "avih");
  Put32(b, kAvihBytes);
  Put32(b, static_cast<uint32_t>(std::llround(1e6 / fps_)));          // dwMicroSecPerFrame
  Put32(b, static_cast<uint32_t>(std::min(4e9, max_chunk_ * fps_)));  // dwMaxBytesPerSec
  Put32(b, 0);                                                        // dwPaddingGranularity
  Put32(b, 0x10);                                                     // dwFlags: AVIF_HASINDEX
  Put32(b, frames);                                                   // dwTotalFrames
  Put32(b, 0);                                                        // dwInitialFrames
  Put32(b, 1);                                                        // dwStreams
  Put32(b, max_chunk_ + 8);                                           // dwSuggestedBufferSize
  Put32(b, w);
  Put32(b, h);
  for (int i = 0; i < 4; ++i) Put32(b, 0);  // dwReserved
  PutFourcc(b, "LIST");
  Put32(b, kStrlBytes);
  PutFourcc(b, "strl");
  // AVISTREAMHEADER
  PutFourcc(b, "strh");
  Put32(b, kStrhBytes);
  PutFourcc(b, "vids");
  PutFourcc(b, "MJPG");
  Put32(b, 0);  // dwFlags
  Put16(b, 0);  // wPriority
  Put16(b, 0);  // wLanguage
  Put32(b, 0);  // dwInitialFrames
  Put32(b, scale);
  Put32(b, rate);
  Put32(b, 0);  // dwStart
  Put32(b, frames);
  Put32(b, max_chunk_ + 8);
  Put32(b, 0xFFFFFFFFu);  // dwQuality: default
  Put32(b, 0);            // dwSampleSize: varies
  Put16(b, 0);
  Put16(b, 0);
  Put16(b, static_cast<uint16_t>(w));
  Put16(b, static_cast<uint16_t>(h));
  // BITMAPINFOHEADER
  PutFourcc(b, "strf");
  Put32(b, kStrfBytes);
  Put32(b, kStrfBytes);
  Put32(b, w);
  Put32(b, h);
  Put16(b, 1);   // biPlanes
  Put16(b, 24);  // biBitCount (decoders output colour)
  PutFourcc(b, "MJPG");
  Put32(b, w * h * 3);
  for (int i = 0; i < 4; ++i) Put32(b, 0);
  PutFourcc(b, "LIST");
  Put32(b, static_cast<uint32_t>(movi_bytes_));
  PutFourcc(b, "movi");
  assert(static_cast<long>(b.size()) == kMoviFourccOffset + 4);
  if (std::fseek(file_.get(), 0, SEEK_SET) != 0 || std::fwrite(b.data(), 1, b.size(), file_.get()) != b.size()) {
    throw std::runtime_error("cannot write the headers of '" + path_.string() + "'");
  }
  std::FILE* f = file_.release();
  if (std::fclose(f) != 0) throw std::runtime_error("cannot finish '" + path_.string() + "'");
}

}  // namespace dropfit::media
