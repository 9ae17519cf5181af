#include "calib/calibration_input.h"

#include <algorithm>
#include <optional>
#include <stdexcept>

#include "media/files.h"

namespace dropfit::calib {

namespace fs = std::filesystem;

namespace {

// Reads one still; a note on 16-bit data's scaling goes to `notes`.
CalibrationImage ReadImage(const fs::path& path, const std::string& role, std::vector<std::string>& notes) {
  std::string note;
  CalibrationImage image{path.string(), media::ReadGreyImage(path, role, &note)};
  if (!note.empty()) notes.push_back(note);
  return image;
}

}  // namespace

std::vector<CalibrationImage> PickVideoViews(const std::string& video_path, const CalibrateOptions& options,
                                             std::vector<std::string>& notes) {
  struct Candidate {
    long frame;
    cv::Mat grey;
    double blur_px;
  };
  long frames = 0, kept = 0, with_board = 0;
  std::vector<std::optional<Candidate>> best;
  media::VideoFrameVisitor visitor;
  visitor.choose = [&](long total) {
    frames = total;
    kept = std::min<long>(options.max_video_views, frames);
    const long candidates = std::min<long>(kept * options.video_candidates_per_view, frames);
    std::vector<long> wanted;
    for (long c = 0; c < candidates; ++c) wanted.push_back((2 * c + 1) * frames / (2 * candidates));
    wanted.erase(std::unique(wanted.begin(), wanted.end()), wanted.end());
    best.assign(static_cast<size_t>(kept), std::nullopt);
    return wanted;
  };
  visitor.visit = [&](long target, const cv::Mat& grey) {
    const BoardDetection d = DetectBoard(grey, options.board, options.subpix_half_window_px);
    if (!d.found) return;
    ++with_board;
    auto& slot = best[static_cast<size_t>(target * kept / frames)];
    if (!slot || d.blur_px < slot->blur_px) slot = Candidate{target, grey.clone(), d.blur_px};
  };
  const long looked = media::VisitVideoFrames(video_path, visitor);
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
  out.plane = ReadImage(plane_path, "the plane view", out.notes);
  out.hashes.emplace_back(plane_path, media::Fnv1a64HexOfFile(plane_path));
  std::error_code ec;
  const fs::path plane_canonical = fs::weakly_canonical(plane_path, ec);
  const auto is_plane = [&](const fs::path& p) {
    std::error_code e;
    return fs::weakly_canonical(p, e) == plane_canonical;
  };
  const auto add_image = [&](const fs::path& p) {
    if (is_plane(p)) return;
    out.views.push_back(ReadImage(p, "image", out.notes));
    out.hashes.emplace_back(p.string(), media::Fnv1a64HexOfFile(p));
  };
  for (const std::string& input : inputs) {
    const fs::path p(input);
    if (fs::is_directory(p, ec)) {
      std::vector<fs::path> files;
      for (const auto& entry : fs::directory_iterator(p)) {
        if (entry.is_regular_file() && media::IsImageFile(entry.path())) files.push_back(entry.path());
      }
      if (files.empty()) {
        throw std::runtime_error("folder " + input + " holds no image files (" + media::ImageExtensionsText() + ")");
      }
      std::sort(files.begin(), files.end());
      for (const fs::path& f : files) add_image(f);
    } else if (!fs::exists(p, ec)) {
      throw std::runtime_error("input " + input + " does not exist; give image files, folders of images, or a video");
    } else if (media::IsVideoFile(p)) {
      std::vector<CalibrationImage> frames = PickVideoViews(input, options, out.notes);
      out.hashes.emplace_back(input, media::Fnv1a64HexOfFile(p));
      for (CalibrationImage& f : frames) out.views.push_back(std::move(f));
    } else {
      add_image(p);
    }
  }
  return out;
}

}  // namespace dropfit::calib
