#pragma once
// The analysis library's input: one clip's hub track as a time series in the drop plane.
//
// Conventions (stated once, here; the same as docs/formats.md, "Coordinates" and "Time"):
// - One sample per frame of the clip, in frame order, consecutive frames (no frame skipped:
//   a frame where the marker was not found is a sample with valid = false, never removed).
// - t_s[i] is the frame's mid-exposure time on the clip's clock (frame / capture rate), so
//   t_s[i] = t_s[0] + i * frame_interval_s. The frame number of sample i is
//   first_frame + i.
// - y_m is the hub height, UP (against gravity); x_m horizontal; both in the drop plane, in
//   metres, in the rig's frame (y_m = 0 on the floor when the rig knows it, see y_origin in
//   the contract).
// - Where valid[i] is false, x_m[i] and y_m[i] are meaningless (kept as NaN by MakeTimeSeries)
//   and every algorithm ignores them.
//
// The cli converts a tracker track into this type (pixels -> metres through
// calib::PlaneFromImage); the analysis never sees pixels. Tests build it from the forward
// model (analysis/forward_model.h) or from closed forms.

#include <optional>
#include <string>
#include <vector>

namespace dropfit::analysis {

struct TimeSeries {
  double frame_interval_s = 0.0;  // 1 / capture rate [s]; > 0
  int first_frame = 0;            // frame number of sample 0 in the clip
  std::vector<double> t_s;        // mid-exposure time of each sample [s]
  std::vector<double> x_m;        // horizontal position in the drop plane [m]
  std::vector<double> y_m;        // height, up [m]
  std::vector<bool> valid;        // false: the marker was not found on that frame

  int size() const { return static_cast<int>(t_s.size()); }
  int CountValid() const;
};

// Builds a series of `frames` samples at `capture_fps` starting at frame `first_frame`
// (t_s = frame / capture_fps), all invalid with NaN coordinates; fill in x_m, y_m, valid.
// Throws std::invalid_argument when capture_fps is not finite and > 0 or frames < 0.
TimeSeries MakeTimeSeries(int frames, double capture_fps, int first_frame = 0);

// Returns a message naming what is wrong (sizes differ, a time not on the frame grid, a
// non-finite coordinate on a valid sample, frame_interval_s <= 0), or nothing.
std::optional<std::string> ValidateTimeSeries(const TimeSeries& series);

// Runs of consecutive invalid samples strictly between valid ones or at the ends.
struct Gap {
  int first_index = 0;  // first missing sample
  int count = 0;        // number of missing samples
};
std::vector<Gap> FindGaps(const TimeSeries& series);

}  // namespace dropfit::analysis
