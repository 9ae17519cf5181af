#include "calib/calibration_input.h"

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <opencv2/videoio.hpp>

#include <algorithm>
#include <cctype>
#include <cstdint>
#include <fstream>
#include <iomanip>
#include <sstream>
#include <stdexcept>

namespace dropfit::calib {

namespace fs = std::filesystem;

namespace {

std::string LowerExtension(const fs::path& path) {
  std::string ext = path.extension().string();
  std::transform(ext.begin(), ext.end(), ext.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  return ext;
}

constexpr uint64_t kFnvOffset = 0xcbf29ce484222325ULL;
constexpr uint64_t kFnvPrime = 0x100000001b3ULL;

std::string Hex16(uint64_t h) {
  std::ostringstream s;
  s << std::hex << std::setw(16) << std::setfill('0') << h;
  return s.str();
}

CalibrationImage ReadImage(const fs::path& path, const std::string& role) {
  std::error_code ec;
  if (!fs::is_regular_file(path, ec)) {
    throw std::runtime_error(role + " " + path.string() + " does not exist or is not a file");
  }
  cv::Mat grey = cv::imread(path.string(), cv::IMREAD_GRAYSCALE);
  if (grey.empty()) {
    throw std::runtime_error(
        role + " " + path.string() +
        " cannot be decoded as an image; give PNG, JPEG, TIFF or BMP files, a folder of them, or a video");
  }
  return {path.string(), grey};
}

}  // namespace

bool IsImageFile(const fs::path& path) {
  static const char* const kExt[] = {".png", ".jpg", ".jpeg", ".bmp", ".tif", ".tiff", ".pgm", ".ppm"};
  const std::string ext = LowerExtension(path);
  return std::any_of(std::begin(kExt), std::end(kExt), [&](const char* e) { return ext == e; });
}

bool IsVideoFile(const fs::path& path) {
  static const char* const kExt[] = {".mp4", ".mov", ".avi", ".mkv", ".m4v", ".webm"};
  const std::string ext = LowerExtension(path);
  return std::any_of(std::begin(kExt), std::end(kExt), [&](const char* e) { return ext == e; });
}

std::string Fnv1a64Hex(const std::string& bytes) {
  uint64_t h = kFnvOffset;
  for (unsigned char c : bytes) h = (h ^ c) * kFnvPrime;
  return Hex16(h);
}

std::string Fnv1a64HexOfFile(const fs::path& path) {
  std::ifstream file(path, std::ios::binary);
  if (!file) throw std::runtime_error("cannot read " + path.string() + " to hash it");
  uint64_t h = kFnvOffset;
  std::vector<char> buffer(1 << 16);
  while (file) {
    file.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    const std::streamsize n = file.gcount();
    for (std::streamsize i = 0; i < n; ++i)
      h = (h ^ static_cast<unsigned char>(buffer[static_cast<size_t>(i)])) * kFnvPrime;
  }
  return Hex16(h);
}

std::vector<CalibrationImage> PickVideoViews(const std::string& video_path, const CalibrateOptions& options,
                                             std::vector<std::string>& notes) {
  cv::VideoCapture cap(video_path);
  if (!cap.isOpened()) {
    throw std::runtime_error("video " + video_path + " cannot be opened (unknown format or damaged file)");
  }
  long frames = static_cast<long>(cap.get(cv::CAP_PROP_FRAME_COUNT));
  if (frames <= 0) {
    // The container does not say: count by grabbing, then reopen.
    frames = 0;
    while (cap.grab()) ++frames;
    cap.release();
    cap.open(video_path);
  }
  if (frames <= 0 || !cap.isOpened()) throw std::runtime_error("video " + video_path + " holds no frames");

  const long kept = std::min<long>(options.max_video_views, frames);
  const long candidates = std::min<long>(kept * options.video_candidates_per_view, frames);
  std::vector<long> wanted;
  for (long c = 0; c < candidates; ++c) wanted.push_back((2 * c + 1) * frames / (2 * candidates));
  wanted.erase(std::unique(wanted.begin(), wanted.end()), wanted.end());

  struct Candidate {
    long frame;
    cv::Mat grey;
    double blur_px;
  };
  std::vector<std::optional<Candidate>> best(static_cast<size_t>(kept));
  long index = 0, looked = 0, with_board = 0;
  cv::Mat frame, grey;
  for (long target : wanted) {
    while (index < target && cap.grab()) ++index;
    if (index != target || !cap.read(frame)) break;
    ++index;
    ++looked;
    if (frame.channels() == 3)
      cv::cvtColor(frame, grey, cv::COLOR_BGR2GRAY);
    else if (frame.channels() == 4)
      cv::cvtColor(frame, grey, cv::COLOR_BGRA2GRAY);
    else
      grey = frame;
    if (grey.depth() != CV_8U) grey.convertTo(grey, CV_8U);
    const BoardDetection d = DetectBoard(grey, options.board, options.subpix_half_window_px);
    if (!d.found) continue;
    ++with_board;
    auto& slot = best[static_cast<size_t>(target * kept / frames)];
    if (!slot || d.blur_px < slot->blur_px) slot = Candidate{target, grey.clone(), d.blur_px};
  }
  if (looked == 0) throw std::runtime_error("video " + video_path + " could not be decoded");
  std::vector<CalibrationImage> views;
  for (auto& slot : best) {
    if (slot) views.push_back({video_path + "#frame " + std::to_string(slot->frame), std::move(slot->grey)});
  }
  notes.push_back(video_path + ": a " + BoardSizeToString(options.board) + " board in " + std::to_string(with_board) +
                  " of " + std::to_string(looked) + " frames looked at (of " + std::to_string(frames) + "); " +
                  std::to_string(views.size()) + " kept, spread over the video");
  return views;
}

CalibrationInputs LoadCalibrationInputs(const std::vector<std::string>& inputs, const std::string& plane_path,
                                        const CalibrateOptions& options) {
  if (plane_path.empty()) {
    throw std::runtime_error("no plane view given: pass --plane IMAGE, an image of the board lying in the drop plane");
  }
  CalibrationInputs out;
  {
    std::error_code ec;
    if (!fs::is_regular_file(plane_path, ec)) {
      throw std::runtime_error("the plane view " + plane_path +
                               " does not exist; --plane must name an image file of the board lying in the drop plane");
    }
  }
  out.plane = ReadImage(plane_path, "the plane view");
  out.hashes.emplace_back(plane_path, Fnv1a64HexOfFile(plane_path));
  std::error_code ec;
  const fs::path plane_canonical = fs::weakly_canonical(plane_path, ec);
  const auto is_plane = [&](const fs::path& p) {
    std::error_code e;
    return fs::weakly_canonical(p, e) == plane_canonical;
  };
  const auto add_image = [&](const fs::path& p) {
    if (is_plane(p)) return;
    out.views.push_back(ReadImage(p, "image"));
    out.hashes.emplace_back(p.string(), Fnv1a64HexOfFile(p));
  };
  for (const std::string& input : inputs) {
    const fs::path p(input);
    if (fs::is_directory(p, ec)) {
      std::vector<fs::path> files;
      for (const auto& entry : fs::directory_iterator(p)) {
        if (entry.is_regular_file() && IsImageFile(entry.path())) files.push_back(entry.path());
      }
      if (files.empty()) {
        throw std::runtime_error("folder " + input +
                                 " holds no image files (.png, .jpg, .jpeg, .bmp, .tif, .tiff, .pgm, .ppm)");
      }
      std::sort(files.begin(), files.end());
      for (const fs::path& f : files) add_image(f);
    } else if (!fs::exists(p, ec)) {
      throw std::runtime_error("input " + input + " does not exist; give image files, folders of images, or a video");
    } else if (IsVideoFile(p)) {
      std::vector<CalibrationImage> frames = PickVideoViews(input, options, out.notes);
      out.hashes.emplace_back(input, Fnv1a64HexOfFile(p));
      for (CalibrationImage& f : frames) out.views.push_back(std::move(f));
    } else {
      add_image(p);
    }
  }
  return out;
}

}  // namespace dropfit::calib
