#pragma once
// The files `dropfit calibrate` reads: image files, folders of images, videos of the board
// being moved, and the plane view; and a hash of each (media/files.h), so a rig names exactly
// what made it. Which files are images or videos, and how they are decoded: media/files.h.

#include <filesystem>
#include <string>
#include <utility>
#include <vector>

#include "calib/calibrate.h"

namespace dropfit::calib {

struct CalibrationInputs {
  std::vector<CalibrationImage> views;                      // lens views, the plane view not among them
  CalibrationImage plane;                                   // the plane view
  std::vector<std::pair<std::string, std::string>> hashes;  // (file, FNV-1a 64-bit hex) per input file
  std::vector<std::string> notes;                           // e.g. how many video frames showed the board
};

// Loads everything. A folder contributes its image files (sorted by name, not recursive); a
// video contributes frames picked by PickVideoViews; the plane view, if also listed among the
// inputs, is used once. Throws std::runtime_error naming the path and saying what to do when
// an input does not exist, cannot be decoded, a folder holds no images, or `plane_path` is empty.
CalibrationInputs LoadCalibrationInputs(const std::vector<std::string>& inputs, const std::string& plane_path,
                                        const CalibrateOptions& options);

// Picks board views from a video: `max_video_views` x `video_candidates_per_view` frames spread
// evenly over it are looked at; in each of `max_video_views` equal spans
// the sharpest frame with a board is kept. Frames are named "<video>#frame <index>" (from 0).
// Throws std::runtime_error naming the file when it cannot be opened or holds no frames.
std::vector<CalibrationImage> PickVideoViews(const std::string& video_path, const CalibrateOptions& options,
                                             std::vector<std::string>& notes);

}  // namespace dropfit::calib
