#pragma once
// The hub-marker tracker: a clip in, a sub-pixel marker track in pixels out (one sample per
// frame, with a quality in [0, 1]); metres are the caller's business (calib::PlaneFromImage).
//
// How a clip is tracked:
// 1. Choosing the marker. Until a marker is chosen, each of the first `detect_frames` frames, then
//    every `detect_every_frames`-th frame, is searched (tracker/marker_detect.h). `marker` picks the
//    kind (kAuto: quadrant discs are preferred to dots, then contrast x score); `seed_px` picks the
//    candidate nearest to it, and with kAuto and no candidate near the seed, the patch around the
//    seed is followed as a template. kTemplate needs `seed_px`. What was chosen, and why, is
//    reported in Track::choice.
// 2. Following it. A constant-acceleration prediction (a least-squares quadratic in time through
//    the last found positions, at most `history_frames` of them within `history_span_frames`)
//    places the fit. Quadrant discs and dots: the point-symmetry fit (tracker/symmetry_fit.h)
//    started at the prediction, with a window of 0.75 x radius (quadrant, inside the disc) or
//    radius + 3 px (dot, with its edge); when it fails, the marker is looked for in the search
//    window (radius + `search_margin_px` around the prediction) and fitted again. Templates:
//    normalised cross-correlation (cv::matchTemplate, TM_CCOEFF_NORMED) in the search window,
//    peak refined to sub-pixel by a parabola through the peak and its neighbours on each axis.
//    The template is cut once, around the seed in the first frame, and never updated (no drift),
//    so it suits a patch that does not turn much: on a turning wheel use a quadrant disc or a dot.
// 3. Losing and finding it again. A frame is "not found" when the fit fails, its quality is
//    below `min_quality` (template: correlation below `min_template_ncc`), or the window leaves
//    the frame. After a loss the search window starts at `reacquire_radius_px` around the last
//    prediction and doubles each frame; once it covers the frame, one frame in
//    `reacquire_every_frames` is searched whole, and the first window around the prediction on
//    the frames between (a marker hidden for a few frames is found again on the first frame it
//    shows). Positions are never invented: a frame without the
//    marker has found = false, and the lost frames are reported as ranges.
//    A template re-locks on any patch that looks alike, also on one far away: a match that
//    jumps farther than the marker can move in the frames since its last position
//    (`max_step_px`) is not taken.
// 4. Judging each frame against the clip's own (quadrant discs and dots, when judge_against_clip
//    and at least judge_min_frames frames were found; docs/methods.md §15). A marker partly
//    hidden (a guide rail, a hand, a cable, a card), cut or washed out still gives a fit, with a
//    confident-looking quality and a centre pulled by up to a pixel. Over the frames found, the
//    clip's median and scaled MAD (1.4826 x the median absolute deviation) are taken of three
//    figures of the fit (tracker/symmetry_fit.h): the misfit m = 1 - quality, the robust shift
//    (how far the centre moves when the pixels that do not fit are discounted) and the window's
//    contrast (s.d.). A frame is left empty (found = false, quality 0, and an EmptyFrame entry
//    with the reason in Track::left_empty) when
//      m     > max(misfit_ratio x median, median + misfit_mads x MAD),          or
//      shift > max(min_robust_shift_px, median + shift_mads x MAD),              or
//      contrast < washed_out_ratio x median.
//    A dot's frame kept whose robust shift still stands out (above median + robust_centre_mads x
//    MAD) reports the robust centre (tracker/symmetry_fit.h): the centre the pixels that fit
//    agree on. (A quadrant disc's fit window lies inside the disc, out of a touching card's reach.)
//    A card touching a dot's edge pulled the plain centre 0.054-0.060 px, the robust one at most
//    0.038 px (bench/occlusion_bench.cpp).
//    Judged on the clip's own spread rather than fixed thresholds, so noise, JPEG or H.264,
//    motion blur at impact, vignetting and flicker, which move every frame's figures alike, do
//    not count against a frame; the judgement is made once the clip is read (Finish), so the
//    per-frame reports of Process (and the overlay) still show such frames as found.
//
// Positions are in OpenCV's pixel convention (the centre of the top-left pixel is (0, 0)). Under
// motion blur they are the mid-exposure positions (symmetric blur, see symmetry_fit.h).
// No global state: one MarkerTracker per clip; several clips may be tracked on separate threads.

#include <opencv2/core.hpp>

#include <filesystem>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "media/frame_source.h"
#include "tracker/marker_detect.h"
#include "tracker/marker_kind.h"

namespace dropfit::tracker {

struct TrackOptions {
  MarkerKind marker = MarkerKind::kAuto;  // which kind to look for
  std::optional<cv::Point2d> seed_px;     // marker centre in the first frames [px], to pick one
  DetectOptions detect;                   // contrast and radius range of markers looked for
  int detect_frames = 30;                 // first frames searched for the marker; [1, 1e6]
  int detect_every_frames = 10;           // then one frame in this many; [1, 1e6]
  double search_margin_px = 6.0;          // search window beyond the marker radius [px]; [1, 200]
  double min_quality = 0.5;               // symmetry-fit quality below this: not found; [0, 1)
  double template_radius_px = 12.0;       // template half-size [px]: a (2r+1)² patch; [3, 100]
  double min_template_ncc = 0.6;          // template correlation below this: not found; (0, 1)
  double reacquire_radius_px = 40.0;      // first re-acquisition window beyond the radius [px]; [1, 1e4]
  int reacquire_every_frames = 4;         // once the window covers the frame; [1, 1000]
  int history_frames = 5;                 // positions used by the prediction; [1, 50]
  int history_span_frames = 8;            // ... within this many frames back; [1, 1000]
  double presmooth_sigma_px = 0.7;        // see SymmetryFitOptions; [0, 3]
  int queue_frames = 8;                   // frames decoded ahead on the reading thread; [1, 256]
  // Frames judged against the clip's own (quadrant discs and dots; see 4. above).
  bool judge_against_clip = true;
  double misfit_ratio = 3.0;           // misfit limit: at least this x the clip's median; [1, 1000]
  double misfit_mads = 8.0;            // ... and the median + this x the scaled MAD; [1, 1000]
  double min_robust_shift_px = 0.025;  // robust-shift limit: at least this [px]; [0.001, 10]
  double shift_mads = 25.0;            // ... and the median + this x the scaled MAD; [1, 1000]
  // A dot's kept frame whose robust shift exceeds max(robust_centre_fraction x min_robust_shift_px,
  // median + robust_centre_mads x MAD) reports the robust centre (tracker/symmetry_fit.h);
  // robust_centre_mads in [1, 1000], robust_centre_fraction in [0, 1] (0: the MAD rule alone).
  double robust_centre_mads = 2.0;
  double robust_centre_fraction = 0.0;
  double washed_out_ratio = 0.5;  // contrast below this x the clip's median: washed out; [0, 1)
  int judge_min_frames = 10;      // fewer frames found: none is judged; [3, 1e6]
  // Templates: the largest plausible move of the marker from one frame to the next [px] (the
  // pipeline sets it from free fall from the drop height + 0.5 m, pipeline::MaxMarkerStepPx);
  // unset: no limit; > 0. A template match farther than k x max_step_px + jump_slack_px from
  // the last position found k frames before is rejected: the frame is left empty with the
  // reason (Track::left_empty), and the marker counts as lost on it (see 3. above).
  std::optional<double> max_step_px;
  double jump_slack_px = 3.0;  // [px] [0, 1000]: the location's own uncertainty
};
// A message naming the first field out of range, or nothing.
std::optional<std::string> ValidateTrackOptions(const TrackOptions& options);

struct TrackSample {
  int frame = 0;
  bool found = false;
  cv::Point2d centre_px{0.0, 0.0};  // meaningful only when found
  double quality = 0.0;             // [0, 1]; 0 when not found
};

// A frame where the marker was located but the location is not trusted: left empty in the track
// (found = false, quality 0), with the reason.
struct EmptyFrame {
  int frame = 0;
  std::string reason;  // one sentence, e.g. "marker partly hidden or disturbed: symmetry misfit ..."
};

struct FrameRange {
  int first = 0;
  int last = 0;  // inclusive
};
// "3-7, 12, 40-41"
std::string FormatFrameRanges(const std::vector<FrameRange>& ranges);

// What the tracker did on one frame (for the overlay and for tests).
struct FrameReport {
  TrackSample sample;
  cv::Rect search_window;         // where the marker was looked for (empty before one was chosen)
  bool reacquiring = false;       // the marker had been lost before this frame
  double marker_radius_px = 0.0;  // of the marker chosen (0 before one was chosen)
};

struct Track {
  std::vector<TrackSample> samples;  // one per frame, frame = index
  int frames = 0;                    // frames in the clip as read (unreadable ones included)
  int tracked_frames = 0;            // samples with found = true
  bool marker_chosen = false;
  MarkerKind kind = MarkerKind::kAuto;  // kind followed (kAuto when none was chosen)
  double marker_radius_px = 0.0;        // disc/dot radius, or template half-size
  std::string choice;                   // what was chosen and why (one sentence)
  std::vector<FrameRange> lost;         // frames without the marker (left_empty included)
  std::vector<EmptyFrame> left_empty;   // frames judged untrustworthy against the clip, in order
  std::vector<std::string> warnings;    // unreadable frames, truncation, lost ranges, marker
                                        // leaving the view, other candidates
  std::vector<std::string> errors;      // marker never found
  double read_seconds = 0.0;            // wall time of the reading thread (decode + grey)
  double track_seconds = 0.0;           // time spent in the tracker proper
};

class MarkerTracker {
 public:
  // Throws std::invalid_argument with ValidateTrackOptions' message.
  explicit MarkerTracker(const TrackOptions& options);
  ~MarkerTracker();
  MarkerTracker(MarkerTracker&&) noexcept;
  MarkerTracker& operator=(MarkerTracker&&) noexcept;

  // Processes frame `frame` (CV_8UC1, all frames of one size). Frames must come in increasing
  // order; a frame index skipped (unreadable frame) counts as not found. Throws
  // std::invalid_argument when the seed lies outside the frame.
  FrameReport Process(int frame, const cv::Mat& grey);

  // The track so far, for a clip of `frames` frames (frames never passed to Process are "not
  // found"). `clip_name` prefixes the messages.
  Track Finish(int frames, const std::string& clip_name) const;

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

// frames done, frames announced (0 when unknown)
using ProgressCallback = std::function<void(int, int)>;

struct OverlayOptions {
  std::filesystem::path path;  // .avi (MJPG), .mp4/.mov (MPEG-4 part 2) or .mkv (FFV1); empty: none
  double playback_fps = 30.0;  // rate stored in the overlay video [frames/s]; (0, 1000]
  int trail_frames = 20;       // positions drawn behind the current one; [0, 1000]
};

// Reads every frame of `source` on a second thread (bounded queue of options.queue_frames) and
// tracks them on the calling thread. Decode errors and truncation become Track::warnings naming
// the file and frame; the frames read are tracked. `progress` (may be empty) is called every
// 64 frames and at the end. Throws std::invalid_argument on bad options or seed, and
// std::runtime_error when the overlay cannot be written.
Track TrackClip(media::FrameSource& source, const TrackOptions& options, const ProgressCallback& progress = {},
                const OverlayOptions& overlay = {});

}  // namespace dropfit::tracker
