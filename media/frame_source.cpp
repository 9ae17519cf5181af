#include "media/frame_source.h"

#include "media/files.h"

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <opencv2/videoio.hpp>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <map>
#include <stdexcept>
#include <system_error>

namespace dropfit::media {

namespace {

// The last run of decimal digits in the file's stem, if any.
std::optional<long long> LastNumber(const std::string& stem) {
  size_t end = stem.size();
  while (end > 0 && !std::isdigit(static_cast<unsigned char>(stem[end - 1]))) --end;
  if (end == 0) return std::nullopt;
  size_t begin = end;
  while (begin > 0 && std::isdigit(static_cast<unsigned char>(stem[begin - 1]))) --begin;
  const std::string digits = stem.substr(begin, end - begin);
  if (digits.size() > 15) return std::nullopt;  // not a frame number
  return std::stoll(digits);
}

std::string SizeText(cv::Size s) { return std::to_string(s.width) + "x" + std::to_string(s.height); }

// Converts any decoded image to 8-bit grey. 16-bit data is scaled by 255 / (2^bits16 - 1)
// (values above that range saturate); sets `scaled16` when 16-bit data was scaled.
void ToGrey8(const cv::Mat& in, cv::Mat& grey, bool& scaled16, int bits16 = 16) {
  cv::Mat work = in;
  if (in.depth() == CV_16U) {
    in.convertTo(work, CV_8U, 255.0 / (std::ldexp(1.0, bits16) - 1.0));
    scaled16 = true;
  } else if (in.depth() != CV_8U) {
    in.convertTo(work, CV_8U);
  }
  if (work.channels() == 1) {
    if (work.data != grey.data) work.copyTo(grey);
  } else if (work.channels() == 3) {
    cv::cvtColor(work, grey, cv::COLOR_BGR2GRAY);
  } else if (work.channels() == 4) {
    cv::cvtColor(work, grey, cv::COLOR_BGRA2GRAY);
  } else {
    throw std::runtime_error("image with " + std::to_string(work.channels()) + " channels is not supported");
  }
}

std::string FourCcText(double value) {
  const int code = static_cast<int>(value);
  std::string s;
  for (int i = 0; i < 4; ++i) {
    const char c = static_cast<char>((code >> (8 * i)) & 0xff);
    s += std::isprint(static_cast<unsigned char>(c)) ? c : '?';
  }
  return s;
}

class VideoSource final : public FrameSource {
 public:
  explicit VideoSource(const std::filesystem::path& clip) {
    info_.path = clip.string();
    if (!capture_.open(clip.string(), cv::CAP_FFMPEG)) {
      throw std::runtime_error(clip.string() +
                               ": cannot be opened as a video (OpenCV's FFmpeg backend refused it); check that it is "
                               "a video file (e.g. MJPG .avi, .mov, .mp4) or pass a folder of numbered images");
    }
    const double count = capture_.get(cv::CAP_PROP_FRAME_COUNT);
    if (std::isfinite(count) && count > 0) info_.announced_frames = static_cast<int>(std::lround(count));
    const double fps = capture_.get(cv::CAP_PROP_FPS);
    if (std::isfinite(fps) && fps > 0) info_.container_fps = fps;
    info_.codec = FourCcText(capture_.get(cv::CAP_PROP_FOURCC));
    if (!capture_.read(bgr_) || bgr_.empty()) {
      throw std::runtime_error(clip.string() +
                               ": no frame could be decoded (empty, truncated before the first frame, "
                               "or an unsupported codec); check the file plays, or export it as MJPG .avi or images");
    }
    info_.size = bgr_.size();
    have_first_ = true;
  }

  FrameRead Read(cv::Mat& grey) override {
    FrameRead r;
    r.frame = next_;
    if (ended_) return r;
    if (have_first_) {
      have_first_ = false;
    } else if (!capture_.read(bgr_) || bgr_.empty()) {
      ended_ = true;
      if (info_.announced_frames && next_ < *info_.announced_frames) {
        r.status = ReadStatus::kError;
        r.is_frame = false;
        r.message = info_.path + ": decoding stopped at frame " + std::to_string(next_) + " of the " +
                    std::to_string(*info_.announced_frames) +
                    " frames the container announces (truncated or damaged file); the last good frame is " +
                    std::to_string(next_ - 1) + " and frames 0-" + std::to_string(next_ - 1) +
                    " are used: copy the file from the camera again to use the rest";
      }
      return r;
    }
    ++next_;
    if (bgr_.size() != info_.size) {
      r.status = ReadStatus::kError;
      r.message = info_.path + ": frame " + std::to_string(r.frame) + " is " + SizeText(bgr_.size()) +
                  " but the clip's first frame is " + SizeText(info_.size) +
                  "; the frame is left empty: check that the file holds one recording";
      return r;
    }
    bool scaled = false;
    ToGrey8(bgr_, grey, scaled);
    r.status = ReadStatus::kFrame;
    return r;
  }

 private:
  cv::VideoCapture capture_;
  cv::Mat bgr_;
  bool have_first_ = false;
  bool ended_ = false;
  int next_ = 0;
};

class ImageFolderSource final : public FrameSource {
 public:
  explicit ImageFolderSource(const std::filesystem::path& folder) {
    info_.path = folder.string();
    info_.image_sequence = true;
    info_.codec = "images";
    files_ = ListNumberedImages(folder);
    if (files_.empty()) {
      throw std::runtime_error(folder.string() + ": holds no numbered image files (" + ImageExtensionsText() +
                               " with a number in the name, e.g. frame_000123.png)");
    }
    first_number_ = files_.front().number;
    const long long span = files_.back().number - first_number_ + 1;
    info_.announced_frames = static_cast<int>(span);
    if (span != static_cast<long long>(files_.size())) {
      info_.warnings.push_back(folder.string() + ": the numbering has " +
                               std::to_string(span - static_cast<long long>(files_.size())) +
                               " gap(s); the missing numbers are frames left empty (each named in its own warning)");
    }
    // The first frame that decodes fixes the clip's size, and whether its data are 16-bit.
    size_t first = 0;
    cv::Mat img;
    for (; first < files_.size(); ++first) {
      img = cv::imread(files_[first].path.string(), cv::IMREAD_ANYDEPTH | cv::IMREAD_ANYCOLOR);
      if (!img.empty()) break;
    }
    if (img.empty()) {
      throw std::runtime_error(folder.string() + ": none of its " + std::to_string(files_.size()) +
                               " image files could be decoded; check the files open in an image viewer");
    }
    info_.size = img.size();
    // 16-bit files: the significant bits from the largest value over the first frames
    // (SignificantBits16), so that 12-bit camera data (0-4095) is not read as nearly black.
    // Only the first kBitDepthFrames files are looked at (the first one already decoded).
    double largest = 0;
    int sixteen_bit = 0;
    for (size_t i = first; i < files_.size() && i < first + kBitDepthFrames; ++i) {
      const cv::Mat frame =
          i == first ? img : cv::imread(files_[i].path.string(), cv::IMREAD_ANYDEPTH | cv::IMREAD_ANYCOLOR);
      if (frame.empty() || frame.depth() != CV_16U) continue;
      double lo = 0, hi = 0;
      cv::minMaxLoc(frame.reshape(1), &lo, &hi);
      largest = std::max(largest, hi);
      ++sixteen_bit;
    }
    if (sixteen_bit > 0) {
      bits16_ = SignificantBits16(static_cast<int>(largest));
      scaling_note_ = Scaling16Note(bits16_, static_cast<int>(largest), sixteen_bit);
    }
  }

  FrameRead Read(cv::Mat& grey) override {
    FrameRead r;
    r.frame = next_frame_;
    if (next_file_ >= files_.size()) return r;
    const NumberedFile& f = files_[next_file_];
    const long long frame_of_file = f.number - first_number_;
    ++next_frame_;
    if (frame_of_file > r.frame) {  // gap in the numbering
      r.status = ReadStatus::kError;
      r.message = info_.path + ": no file for frame " + std::to_string(r.frame) + " (number " +
                  std::to_string(first_number_ + r.frame) +
                  " is missing from the sequence); the frame is left empty: copy the missing file into the folder "
                  "to use it";
      return r;
    }
    ++next_file_;
    cv::Mat img = cv::imread(f.path.string(), cv::IMREAD_ANYDEPTH | cv::IMREAD_ANYCOLOR);
    if (img.empty()) {
      r.status = ReadStatus::kError;
      r.message =
          f.path.string() + ": frame " + std::to_string(r.frame) +
          " could not be decoded (damaged or not an image); the frame is left empty: replace the file to use it";
      return r;
    }
    if (img.size() != info_.size) {
      r.status = ReadStatus::kError;
      r.message = f.path.string() + ": frame " + std::to_string(r.frame) + " is " + SizeText(img.size()) +
                  " but the clip's first frame is " + SizeText(info_.size) +
                  "; the frame is left empty: keep one camera's frames, of one size, in the folder";
      return r;
    }
    bool scaled = false;
    ToGrey8(img, grey, scaled, bits16_);
    if (scaled && !warned16_) {
      warned16_ = true;
      info_.warnings.push_back(info_.path + ": " + scaling_note_);
    }
    r.status = ReadStatus::kFrame;
    return r;
  }

 private:
  std::vector<NumberedFile> files_;
  long long first_number_ = 0;
  size_t next_file_ = 0;
  int next_frame_ = 0;
  bool warned16_ = false;
  int bits16_ = 16;  // significant bits of the 16-bit frames
  // What the scaling of 16-bit frames did (16-bit frames only after the first files: as 16 bits).
  std::string scaling_note_ =
      "16-bit images were scaled to 8 bits for tracking as 16-bit data (none among the first files to measure "
      "their significant bits: values / 65535 x 255)";
};

}  // namespace

int SignificantBits16(int largest_value) {
  int bits = 8;
  while (bits < 16 && largest_value > (1 << bits) - 1) ++bits;
  return bits;
}

std::string Scaling16Note(int bits, int largest_value, int frames) {
  std::string note = "16-bit images were scaled to 8 bits for tracking as " + std::to_string(bits) +
                     "-bit data (largest value " + std::to_string(largest_value) + " over the first " +
                     std::to_string(frames) + (frames == 1 ? " frame" : " frames") + ": values / " +
                     std::to_string((1 << bits) - 1) + " x 255";
  if (bits < 16) note += ", brighter later values are clipped";
  return note + ")";
}

std::vector<NumberedFile> ListNumberedImages(const std::filesystem::path& folder) {
  std::error_code ec;
  std::filesystem::directory_iterator it(folder, ec);
  if (ec) throw std::runtime_error(folder.string() + ": cannot be listed (" + ec.message() + ")");
  std::map<long long, std::filesystem::path> by_number;
  for (const auto& entry : it) {
    if (!entry.is_regular_file() || !IsImageFile(entry.path())) continue;
    const auto number = LastNumber(entry.path().stem().string());
    if (!number) continue;
    auto [pos, inserted] = by_number.emplace(*number, entry.path());
    if (!inserted) {
      throw std::runtime_error(folder.string() + ": files '" + pos->second.filename().string() + "' and '" +
                               entry.path().filename().string() + "' carry the same frame number " +
                               std::to_string(*number) + "; keep one image sequence per folder");
    }
  }
  std::vector<NumberedFile> files;
  files.reserve(by_number.size());
  for (auto& [number, path] : by_number) files.push_back({number, path});
  return files;
}

std::unique_ptr<FrameSource> FrameSource::Open(const std::filesystem::path& clip) {
  std::error_code ec;
  if (!std::filesystem::exists(clip, ec)) {
    throw std::runtime_error(clip.string() + ": no such file or folder; check the path");
  }
  if (std::filesystem::is_directory(clip, ec)) return std::make_unique<ImageFolderSource>(clip);
  if (std::filesystem::is_regular_file(clip, ec) && std::filesystem::file_size(clip, ec) == 0 && !ec) {
    throw std::runtime_error(clip.string() +
                             ": is empty (0 bytes): the recording was not saved or not copied completely; copy the "
                             "clip from the camera again");
  }
  return std::make_unique<VideoSource>(clip);
}

}  // namespace dropfit::media
