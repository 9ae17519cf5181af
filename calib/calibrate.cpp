#include "calib/calibrate.h"

#include <opencv2/calib3d.hpp>
#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cassert>
#include <cfloat>
#include <cmath>
#include <iomanip>
#include <numeric>
#include <sstream>
#include <stdexcept>

#include "calib/calibrate_steps.h"
#include "calib/corner_refine.h"
#include "calib/rig_uncertainty.h"
#include "dropfit/version.h"

namespace dropfit::calib {

namespace {

constexpr double kPi = 3.14159265358979323846;
// A Gaussian edge rises from 10 % to 90 % over 2 * sqrt(2) * erfinv(0.8) sigma = 2.5631 sigma.
constexpr double kRise10To90PerSigma = 2.5631;
// Fewest views with which a lens model is fitted at all (Zhang 2000: two views fix four
// intrinsics; a third makes the problem over-determined with distortion).
constexpr int kFewestLensViews = 3;

std::string Fmt(double v, int decimals) {
  std::ostringstream s;
  s << std::fixed << std::setprecision(decimals) << v;
  return s.str();
}
std::string Num(double v) {
  std::ostringstream s;
  s << v;
  return s.str();
}
std::string JoinNames(const std::vector<std::string>& names) {
  std::string out;
  for (size_t i = 0; i < names.size(); ++i) out += (i ? ", " : "") + names[i];
  return out;
}
std::string Plural(size_t n, const std::string& one, const std::string& many) {
  return std::to_string(n) + " " + (n == 1 ? one : many);
}

// The inner corners' board coordinates (X, Y) [m], row by row.
std::vector<cv::Point2f> BoardPoints2d(const BoardSpec& board) {
  std::vector<cv::Point2f> board_2d;
  for (const cv::Point3f& p : BoardPoints3d(board)) board_2d.emplace_back(p.x, p.y);
  return board_2d;
}

// A homography applied to a point.
cv::Point2d Apply(const cv::Matx33d& h, cv::Point2d p) {
  const cv::Vec3d q = h * cv::Vec3d(p.x, p.y, 1.0);
  return cv::Point2d(q[0] / q[2], q[1] / q[2]);
}

double Bilinear(const cv::Mat& grey, double x, double y) {
  const int x0 = std::clamp(static_cast<int>(std::floor(x)), 0, grey.cols - 2);
  const int y0 = std::clamp(static_cast<int>(std::floor(y)), 0, grey.rows - 2);
  const double fx = std::clamp(x - x0, 0.0, 1.0), fy = std::clamp(y - y0, 0.0, 1.0);
  const auto at = [&](int yy, int xx) { return static_cast<double>(grey.at<uchar>(yy, xx)); };
  return (1 - fy) * ((1 - fx) * at(y0, x0) + fx * at(y0, x0 + 1)) +
         fy * ((1 - fx) * at(y0 + 1, x0) + fx * at(y0 + 1, x0 + 1));
}

double Median(std::vector<double> v) {
  assert(!v.empty());
  std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
  return v[v.size() / 2];
}

bool FindCorners(const cv::Mat& grey, const BoardSpec& b, std::vector<cv::Point2f>& corners) {
  return cv::findChessboardCornersSB(grey, cv::Size(b.columns, b.rows), corners, cv::CALIB_CB_NORMALIZE_IMAGE);
}

// How strongly `p` looks like a checkerboard X-corner whose neighbouring corners lie `a` and `b`
// away (the grid steps along a row and along a column) in `smooth` (float, blurred): the four
// squares around an X-corner alternate dark and light, so the samples at p + (+-a +-b)/2 pair up
// along the diagonals. The contrast between the diagonals, less the spread within each
// diagonal; about the square contrast at a corner, below 0 at the board's outer edge (two of the
// four samples fall on the white border). Common practice, no source. NaN when a sample is
// outside the image.
double XCornerResponse(const cv::Mat& smooth, cv::Point2d p, cv::Point2d a, cv::Point2d b, bool less_spread = true) {
  const auto at = [&smooth](cv::Point2d q) {
    if (!(q.x >= 1 && q.y >= 1 && q.x < smooth.cols - 2 && q.y < smooth.rows - 2)) return std::nan("");
    const int x0 = static_cast<int>(q.x), y0 = static_cast<int>(q.y);
    const double fx = q.x - x0, fy = q.y - y0;
    const auto v = [&smooth](int y, int x) { return static_cast<double>(smooth.at<float>(y, x)); };
    return (1 - fy) * ((1 - fx) * v(y0, x0) + fx * v(y0, x0 + 1)) +
           fy * ((1 - fx) * v(y0 + 1, x0) + fx * v(y0 + 1, x0 + 1));
  };
  const double i1 = at(p + 0.5 * (a + b)), i3 = at(p - 0.5 * (a + b));
  const double i2 = at(p + 0.5 * (a - b)), i4 = at(p - 0.5 * (a - b));
  const double between = std::abs(i1 + i3 - i2 - i4) / 2;
  return less_spread ? between - std::abs(i1 - i3) - std::abs(i2 - i4) : between;
}

// At real X-corners the diagonals' spread is small beside their contrast: the median response
// must keep at least this share of the median contrast (on rendered and demo boards it keeps
// ~0.9; a sheared grid goes below 0). Common practice, no source.
constexpr double kRealCornerFraction = 0.5;

// True when the corners found for `b` cover the whole board in view: one grid step beyond each
// of the four outer corner rows and columns there is no X-corner (a detection of part of a
// larger board has more corners there). Half of a side's extrapolated points answering like
// the found corners (at least half their median response) count as more board; points outside
// the image count for nothing.
bool DetectionCoversBoard(const cv::Mat& grey, const BoardSpec& b, const std::vector<cv::Point2f>& corners) {
  cv::Mat smooth;
  grey.convertTo(smooth, CV_32F);
  const auto c = [&](int row, int col) { return cv::Point2d(corners[static_cast<size_t>(row * b.columns + col)]); };
  const double step_px = cv::norm(c(0, 1) - c(0, 0));
  const double sigma = std::max(0.5, 0.1 * step_px);
  cv::GaussianBlur(smooth, smooth, cv::Size(), sigma);
  std::vector<double> found, contrast;
  for (int row = 0; row < b.rows; ++row) {
    for (int col = 0; col < b.columns; ++col) {
      const cv::Point2d a = col + 1 < b.columns ? c(row, col + 1) - c(row, col) : c(row, col) - c(row, col - 1);
      const cv::Point2d d = row + 1 < b.rows ? c(row + 1, col) - c(row, col) : c(row, col) - c(row - 1, col);
      const double r = XCornerResponse(smooth, c(row, col), a, d);
      if (!std::isfinite(r)) continue;
      found.push_back(r);
      contrast.push_back(XCornerResponse(smooth, c(row, col), a, d, false));
    }
  }
  if (found.empty()) return false;
  // The found corners must be X-corners themselves: the detector also returns sheared grids
  // through a board of another size (seen on the demo board: a "3x8" on a 6x9 board).
  const double found_median = Median(found);
  if (!(found_median > kRealCornerFraction * Median(contrast))) return false;
  const double threshold = 0.5 * found_median;
  // Each side: the outer corner line, the line next to it (giving the step outwards), and the
  // step along the line.
  struct Line {
    cv::Point2d edge, inner, along;
  };
  const auto side_extends = [&](const std::vector<Line>& side) {
    int inside = 0, corners_beyond = 0;
    for (const Line& l : side) {
      const cv::Point2d out = l.edge - l.inner;
      const double r = XCornerResponse(smooth, l.edge + out, l.along, out);
      if (!std::isfinite(r)) continue;
      ++inside;
      if (r > threshold) ++corners_beyond;
    }
    return inside > 0 && 2 * corners_beyond >= inside;
  };
  std::vector<Line> left, right, top, bottom;
  for (int row = 0; row < b.rows; ++row) {
    const cv::Point2d along = row + 1 < b.rows ? c(row + 1, 0) - c(row, 0) : c(row, 0) - c(row - 1, 0);
    const cv::Point2d along_r = row + 1 < b.rows ? c(row + 1, b.columns - 1) - c(row, b.columns - 1)
                                                 : c(row, b.columns - 1) - c(row - 1, b.columns - 1);
    left.push_back({c(row, 0), c(row, 1), along});
    right.push_back({c(row, b.columns - 1), c(row, b.columns - 2), along_r});
  }
  for (int col = 0; col < b.columns; ++col) {
    const cv::Point2d along = col + 1 < b.columns ? c(0, col + 1) - c(0, col) : c(0, col) - c(0, col - 1);
    const cv::Point2d along_b =
        col + 1 < b.columns ? c(b.rows - 1, col + 1) - c(b.rows - 1, col) : c(b.rows - 1, col) - c(b.rows - 1, col - 1);
    top.push_back({c(0, col), c(1, col), along});
    bottom.push_back({c(b.rows - 1, col), c(b.rows - 2, col), along_b});
  }
  return !side_extends(left) && !side_extends(right) && !side_extends(top) && !side_extends(bottom);
}

// Looks for a board of a nearby size (the user may have counted squares, or miscounted) in the
// first few images, so the "no board" message can name the right --board. Only a size whose
// detection covers the whole board in view is named (DetectionCoversBoard): the detector also
// finds parts of a larger board, and naming such a part would make a wrong rig.
std::optional<std::pair<BoardSpec, std::string>> FindOtherBoardSize(const std::vector<const CalibrationImage*>& images,
                                                                    const BoardSpec& given) {
  std::vector<BoardSpec> sizes;
  for (int d = 1; d <= 2; ++d) {
    for (int dc = -2; dc <= 2; ++dc) {
      for (int dr = -2; dr <= 2; ++dr) {
        if (std::abs(dc) + std::abs(dr) != d) continue;
        BoardSpec b = given;
        b.columns += dc;
        b.rows += dr;
        if (b.columns >= 3 && b.rows >= 3) sizes.push_back(b);
      }
    }
  }
  constexpr size_t kImagesTried = 2;  // ~0.1-0.5 s per size and image
  for (size_t i = 0; i < std::min(kImagesTried, images.size()); ++i) {
    for (const BoardSpec& b : sizes) {
      std::vector<cv::Point2f> corners;
      if (FindCorners(images[i]->grey, b, corners) && DetectionCoversBoard(images[i]->grey, b, corners)) {
        return std::make_pair(b, images[i]->name);
      }
    }
  }
  return std::nullopt;
}

void CheckImage(const CalibrationImage& image, cv::Size size) {
  if (image.grey.empty()) throw std::invalid_argument("image " + image.name + " is empty");
  if (image.grey.type() != CV_8UC1) {
    throw std::invalid_argument("image " + image.name + " is not 8-bit grey (convert it before calibrating)");
  }
  if (image.grey.size() != size) {
    throw std::invalid_argument("image " + image.name + " is " + std::to_string(image.grey.cols) + "x" +
                                std::to_string(image.grey.rows) + " px but the plane view is " +
                                std::to_string(size.width) + "x" + std::to_string(size.height) +
                                " px; all views must come from the same camera at the same resolution");
  }
}

void RecordSettings(const CalibrateOptions& o, Rig& rig) {
  auto& s = rig.settings;
  s.emplace_back("board", BoardSizeToString(o.board));
  s.emplace_back("square_m", Num(o.board.square_m));
  s.emplace_back("corner_height_m", o.corner_height_m ? Num(*o.corner_height_m) : "");
  s.emplace_back("corner_height_sd_m", Num(o.corner_height_sd_m));
  s.emplace_back("up", ToString(o.up));
  s.emplace_back("capture_fps", o.capture_fps ? Num(*o.capture_fps) : "");
  s.emplace_back("force", o.force ? "true" : "false");
  s.emplace_back("min_lens_views", std::to_string(o.min_lens_views));
  s.emplace_back("max_rms_px", Num(o.max_rms_px));
  s.emplace_back("warn_rms_px", Num(o.warn_rms_px));
  s.emplace_back("outlier_factor", Num(o.outlier_factor));
  s.emplace_back("outlier_floor_px", Num(o.outlier_floor_px));
  s.emplace_back("max_blur_px", Num(o.max_blur_px));
  s.emplace_back("min_board_coverage_fraction", Num(o.min_board_coverage_fraction));
  s.emplace_back("min_views_coverage_fraction", Num(o.min_views_coverage_fraction));
  s.emplace_back("min_tilt_spread_deg", Num(o.min_tilt_spread_deg));
  s.emplace_back("subpix_half_window_px", std::to_string(o.subpix_half_window_px));
  s.emplace_back("max_video_views", std::to_string(o.max_video_views));
  s.emplace_back("video_candidates_per_view", std::to_string(o.video_candidates_per_view));
}

}  // namespace

std::optional<std::string> ValidateCalibrateOptions(const CalibrateOptions& o) {
  const auto bad = [](const std::string& name, double value, const std::string& range) {
    return std::optional<std::string>(name + " = " + Num(value) + " is out of range (" + range + ")");
  };
  if (o.board.columns < 3 || o.board.rows < 3) {
    return "board " + BoardSizeToString(o.board) + " is out of range (at least 3x3 inner corners)";
  }
  if (!(std::isfinite(o.board.square_m) && o.board.square_m >= kMinSquareM && o.board.square_m <= kMaxSquareM)) {
    return bad("square_m", o.board.square_m, Num(kMinSquareM) + ".." + Num(kMaxSquareM) + " m; " + kRigMillimetresHint);
  }
  if (o.corner_height_m &&
      !(std::isfinite(*o.corner_height_m) && *o.corner_height_m >= 0 && *o.corner_height_m <= kMaxCornerHeightM)) {
    return bad("corner_height_m", *o.corner_height_m, "0.." + Num(kMaxCornerHeightM) + " m; " + kRigMillimetresHint);
  }
  if (!(std::isfinite(o.corner_height_sd_m) && o.corner_height_sd_m >= 0 && o.corner_height_sd_m <= 1)) {
    return bad("corner_height_sd_m", o.corner_height_sd_m, "0..1 m");
  }
  if (o.capture_fps && !(std::isfinite(*o.capture_fps) && *o.capture_fps > 0)) {
    return bad("capture_fps", *o.capture_fps, "> 0 frames/s");
  }
  if (o.min_lens_views < kFewestLensViews || o.min_lens_views > 1000)
    return bad("min_lens_views", o.min_lens_views, "3..1000");
  if (!(o.max_rms_px > 0)) return bad("max_rms_px", o.max_rms_px, "> 0 px");
  if (!(o.warn_rms_px > 0 && o.warn_rms_px <= o.max_rms_px))
    return bad("warn_rms_px", o.warn_rms_px, "> 0 px, <= max_rms_px");
  if (!(o.outlier_factor > 1)) return bad("outlier_factor", o.outlier_factor, "> 1");
  if (!(o.outlier_floor_px >= 0)) return bad("outlier_floor_px", o.outlier_floor_px, ">= 0 px");
  if (!(o.max_blur_px > 0)) return bad("max_blur_px", o.max_blur_px, "> 0 px");
  if (!(o.min_board_coverage_fraction >= 0 && o.min_board_coverage_fraction <= 1)) {
    return bad("min_board_coverage_fraction", o.min_board_coverage_fraction, "0..1");
  }
  if (!(o.min_views_coverage_fraction >= 0 && o.min_views_coverage_fraction <= 1)) {
    return bad("min_views_coverage_fraction", o.min_views_coverage_fraction, "0..1");
  }
  if (!(o.min_tilt_spread_deg >= 0 && o.min_tilt_spread_deg <= 90))
    return bad("min_tilt_spread_deg", o.min_tilt_spread_deg, "0..90 deg");
  if (o.subpix_half_window_px < 2 || o.subpix_half_window_px > 30)
    return bad("subpix_half_window_px", o.subpix_half_window_px, "2..30 px");
  if (o.max_video_views < 3 || o.max_video_views > 200) return bad("max_video_views", o.max_video_views, "3..200");
  if (o.video_candidates_per_view < 1 || o.video_candidates_per_view > 20) {
    return bad("video_candidates_per_view", o.video_candidates_per_view, "1..20");
  }
  return std::nullopt;
}

double EstimateEdgeBlurPx(const cv::Mat& grey, const std::vector<cv::Point2f>& corners_px, const BoardSpec& board) {
  constexpr double kStepPx = 0.25;       // profile sampling step
  constexpr double kMaxReachPx = 15.0;   // profile half-length cap
  constexpr double kMinContrast = 20.0;  // grey levels; flatter profiles are not edges
  std::vector<double> sigmas;
  const auto measure = [&](cv::Point2f a, cv::Point2f b) {
    const cv::Point2d d(b.x - a.x, b.y - a.y);
    const double len = std::hypot(d.x, d.y);
    if (len < 4) return;
    const cv::Point2d mid((a.x + b.x) / 2.0, (a.y + b.y) / 2.0), nrm(-d.y / len, d.x / len);
    const double reach = std::min(0.35 * len, kMaxReachPx);
    std::vector<double> p;
    for (double t = -reach; t <= reach + 1e-9; t += kStepPx)
      p.push_back(Bilinear(grey, mid.x + t * nrm.x, mid.y + t * nrm.y));
    if (p.size() < 8) return;
    if (p.back() < p.front()) std::reverse(p.begin(), p.end());
    const double lo = (p[0] + p[1] + p[2]) / 3.0, hi = (p[p.size() - 1] + p[p.size() - 2] + p[p.size() - 3]) / 3.0;
    if (hi - lo < kMinContrast) return;
    int inside = 0;
    for (double v : p) {
      const double f = (v - lo) / (hi - lo);
      if (f > 0.1 && f < 0.9) ++inside;
    }
    sigmas.push_back(inside * kStepPx / kRise10To90PerSigma);
  };
  for (int j = 0; j < board.rows; ++j) {
    for (int i = 0; i < board.columns; ++i) {
      const size_t k = static_cast<size_t>(j * board.columns + i);
      if (i + 1 < board.columns) measure(corners_px[k], corners_px[k + 1]);
      if (j + 1 < board.rows) measure(corners_px[k], corners_px[k + static_cast<size_t>(board.columns)]);
    }
  }
  return sigmas.empty() ? 0.0 : Median(sigmas);
}

BoardDetection DetectBoard(const cv::Mat& grey, const BoardSpec& board, int subpix_half_window_px) {
  if (grey.empty() || grey.type() != CV_8UC1) {
    throw std::invalid_argument("DetectBoard needs a non-empty 8-bit grey image");
  }
  BoardDetection out;
  out.found = FindCorners(grey, board, out.corners_px);
  if (!out.found) {
    out.corners_px.clear();
    return out;
  }
  // The refinement window must stay inside the four squares around a corner.
  double spacing = INFINITY;
  for (int j = 0; j < board.rows; ++j) {
    for (int i = 0; i + 1 < board.columns; ++i) {
      const size_t k = static_cast<size_t>(j * board.columns + i);
      spacing = std::min(spacing, cv::norm(out.corners_px[k + 1] - out.corners_px[k]));
    }
  }
  const int half = std::clamp(static_cast<int>(0.4 * spacing), 2, subpix_half_window_px);
  cv::cornerSubPix(grey, out.corners_px, cv::Size(half, half), cv::Size(-1, -1),
                   cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 50, 1e-3));
  // Then the saddle-point fit and the X-corner fit from it (calib/corner_refine.h), in a disc
  // that stays inside the four squares around every corner.
  CornerRefineOptions refine;
  refine.saddle.half_window_px = SaddleHalfWindowPx(out.corners_px, board, subpix_half_window_px);
  refine.xcorner.half_window_px = refine.saddle.half_window_px;
  RefinedCorners refined = RefineCorners(grey, out.corners_px, refine);
  out.corners_px = std::move(refined.corners_px);
  out.refine_fallbacks = std::move(refined.fallbacks);
  out.blur_px = EstimateEdgeBlurPx(grey, out.corners_px, board);
  return out;
}

// --- The steps (calib/calibrate_steps.h) ---

std::vector<cv::Point3f> BoardPoints3d(const BoardSpec& b) {
  std::vector<cv::Point3f> pts;
  for (int j = 0; j < b.rows; ++j) {
    for (int i = 0; i < b.columns; ++i) {
      pts.emplace_back(static_cast<float>(i * b.square_m), static_cast<float>(j * b.square_m), 0.f);
    }
  }
  return pts;
}

std::vector<cv::Point2f> OuterQuad(const std::vector<cv::Point2f>& c, const BoardSpec& b) {
  const size_t last = c.size() - 1;
  return {c[0], c[static_cast<size_t>(b.columns) - 1], c[last], c[last - static_cast<size_t>(b.columns) + 1]};
}

LensFit FitLens(const std::vector<std::vector<cv::Point3f>>& object, const std::vector<std::vector<cv::Point2f>>& image,
                cv::Size size) {
  struct Candidate {
    int flags;
    const char* terms;
    int n_terms;
  };
  const Candidate candidates[] = {
      {cv::CALIB_FIX_K2 | cv::CALIB_FIX_K3 | cv::CALIB_ZERO_TANGENT_DIST, "k1", 1},
      {cv::CALIB_FIX_K3 | cv::CALIB_ZERO_TANGENT_DIST, "k1,k2", 2},
      {cv::CALIB_FIX_K3, "k1,k2,p1,p2", 4},
      {0, "k1,k2,p1,p2,k3", 5},
  };
  size_t corners = 0;
  for (const auto& v : image) corners += v.size();
  const double n = 2.0 * static_cast<double>(corners);
  LensFit best;
  double best_bic = INFINITY;
  for (const Candidate& c : candidates) {
    cv::Mat k, dist;
    std::vector<cv::Mat> rvecs, tvecs;
    const double rms =
        cv::calibrateCamera(object, image, size, k, dist, rvecs, tvecs, c.flags,
                            cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 100, DBL_EPSILON));
    if (!std::isfinite(rms)) continue;
    // BIC (Schwarz 1978) with RSS/n = rms^2 / 2; the constant offset does not change the choice.
    const double bic = n * std::log(std::max(rms * rms, 1e-300)) + c.n_terms * std::log(n);
    if (bic < best_bic) {
      best_bic = bic;
      best.rms_px = rms;
      best.camera_matrix = cv::Matx33d(k);
      best.distortion.assign(dist.begin<double>(), dist.end<double>());
      best.rvecs = rvecs;
      best.tvecs = tvecs;
      best.terms = c.terms;
    }
  }
  if (!std::isfinite(best_bic)) throw std::runtime_error("cv::calibrateCamera returned no finite fit");
  best.distortion.resize(5, 0.0);
  for (size_t v = 0; v < image.size(); ++v) {
    std::vector<cv::Point2f> projected;
    cv::projectPoints(object[v], best.rvecs[v], best.tvecs[v], best.camera_matrix, best.distortion, projected);
    double sum = 0;
    for (size_t i = 0; i < projected.size(); ++i) {
      const cv::Point2f d = projected[i] - image[v][i];
      sum += d.dot(d);
    }
    best.view_rms_px.push_back(std::sqrt(sum / static_cast<double>(projected.size())));
  }
  return best;
}

LensFitWithoutOutliers FitLensWithoutOutliers(std::vector<std::string> names,
                                              std::vector<std::vector<cv::Point2f>> corners_px, const BoardSpec& board,
                                              cv::Size size, double outlier_factor, double outlier_floor_px) {
  if (names.size() != corners_px.size() || names.size() < static_cast<size_t>(kFewestLensViews)) {
    throw std::invalid_argument("FitLensWithoutOutliers needs at least " + std::to_string(kFewestLensViews) +
                                " views with one name each; got " + std::to_string(names.size()) + " names and " +
                                std::to_string(corners_px.size()) + " corner sets");
  }
  LensFitWithoutOutliers out;
  const auto object_pts = [&] {
    return std::vector<std::vector<cv::Point3f>>(corners_px.size(), BoardPoints3d(board));
  };
  LensFit fit = FitLens(object_pts(), corners_px, size);
  // Drop views far worse than the rest, worst first, one at a time (never the plane view, index 0).
  while (corners_px.size() > static_cast<size_t>(kFewestLensViews)) {
    const double median = Median(fit.view_rms_px);
    const auto worst = std::max_element(fit.view_rms_px.begin() + 1, fit.view_rms_px.end());
    if (!(*worst > outlier_factor * median && *worst > outlier_floor_px)) break;
    const size_t w = static_cast<size_t>(worst - fit.view_rms_px.begin());
    out.dropped.push_back(names[w] + ": RMS " + Fmt(*worst, 2) + " px, far above the median " + Fmt(median, 2) + " px");
    out.warnings.push_back("view " + names[w] + " left out: its RMS reprojection error " + Fmt(*worst, 2) +
                           " px is far above the median " + Fmt(median, 2) +
                           " px (a moved, bent or mis-detected board)");
    names.erase(names.begin() + static_cast<long>(w));
    corners_px.erase(corners_px.begin() + static_cast<long>(w));
    fit = FitLens(object_pts(), corners_px, size);
  }
  const double median = Median(fit.view_rms_px);
  if (fit.view_rms_px[0] > outlier_factor * median && fit.view_rms_px[0] > outlier_floor_px) {
    out.warnings.push_back("the plane view " + names[0] + " fits the lens model worse than the other views (RMS " +
                           Fmt(fit.view_rms_px[0], 2) + " px against a median of " + Fmt(median, 2) +
                           " px): check that it shows the same flat board, still and sharp");
  }
  out.fit = std::move(fit);
  out.names = std::move(names);
  out.corners_px = std::move(corners_px);
  return out;
}

std::optional<PlaneHomography> FitPlaneHomography(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board,
                                                  const std::optional<LensModel>& lens) {
  std::vector<cv::Point2f> und = corners_px;
  if (lens) {
    cv::undistortPoints(corners_px, und, lens->camera_matrix, lens->distortion, cv::noArray(), lens->camera_matrix,
                        cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 100, 1e-12));
  }
  const std::vector<cv::Point2f> board_2d = BoardPoints2d(board);
  const cv::Mat h_mat = cv::findHomography(board_2d, und, 0);
  if (h_mat.empty()) return std::nullopt;
  PlaneHomography out;
  out.undistorted_from_board = cv::Matx33d(h_mat);
  double sum = 0;
  for (size_t i = 0; i < und.size(); ++i) {
    const cv::Point2d d = Apply(out.undistorted_from_board, board_2d[i]) - cv::Point2d(und[i]);
    sum += d.dot(d);
  }
  out.rms_px = std::sqrt(sum / static_cast<double>(und.size()));
  return out;
}

BoardAxes FindBoardAxes(const cv::Matx33d& undistorted_from_board, const BoardSpec& board, UpSide up) {
  const auto to_image = [&](cv::Point2d b) { return Apply(undistorted_from_board, b); };
  // Board axes as seen in the image, at the board's centre.
  const cv::Point2d centre_b(0.5 * (board.columns - 1) * board.square_m, 0.5 * (board.rows - 1) * board.square_m);
  const double step = 0.5 * board.square_m;
  const cv::Point2d c_img = to_image(centre_b);
  const cv::Vec2d axis_img[4] = {cv::Vec2d(to_image(centre_b + cv::Point2d(step, 0)) - c_img),
                                 cv::Vec2d(to_image(centre_b - cv::Point2d(step, 0)) - c_img),
                                 cv::Vec2d(to_image(centre_b + cv::Point2d(0, step)) - c_img),
                                 cv::Vec2d(to_image(centre_b - cv::Point2d(0, step)) - c_img)};
  const cv::Vec2d axis_board[4] = {{1, 0}, {-1, 0}, {0, 1}, {0, -1}};
  cv::Vec2d side;
  switch (up) {
    case UpSide::kTop:
      side = {0, -1};
      break;
    case UpSide::kBottom:
      side = {0, 1};
      break;
    case UpSide::kLeft:
      side = {-1, 0};
      break;
    case UpSide::kRight:
      side = {1, 0};
      break;
  }
  int up_axis = 0;
  double best_cos = -2;
  for (int a = 0; a < 4; ++a) {
    const double c = axis_img[a].dot(side) / cv::norm(axis_img[a]);
    if (c > best_cos) {
      best_cos = c;
      up_axis = a;
    }
  }
  BoardAxes axes;
  axes.up_board = axis_board[up_axis];
  // x_m: the perpendicular board axis, signed so that (x, up) turn like (right, up) in the image
  // (negative 2-D cross product with v down).
  const int x_axis = up_axis < 2 ? 2 : 0;
  const auto cross = [](cv::Vec2d a, cv::Vec2d b) { return a[0] * b[1] - a[1] * b[0]; };
  axes.x_board = cross(axis_img[x_axis], axis_img[up_axis]) < 0 ? axis_board[x_axis] : -axis_board[x_axis];
  axes.off_up_deg = std::acos(std::clamp(best_cos, -1.0, 1.0)) * 180.0 / kPi;
  return axes;
}

PlaneOrigin PlaceOrigin(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board, const BoardAxes& axes,
                        std::optional<double> corner_height_m) {
  const std::vector<cv::Point2f> board_2d = BoardPoints2d(board);
  const cv::Vec2d &up_b = axes.up_board, &x_b = axes.x_board;
  double x_min = INFINITY, y_min = INFINITY;
  for (const cv::Point2f& b : board_2d) {
    x_min = std::min(x_min, x_b[0] * b.x + x_b[1] * b.y);
    y_min = std::min(y_min, up_b[0] * b.x + up_b[1] * b.y);
  }
  const double y_lowest_row_m = corner_height_m.value_or(0.0);
  PlaneOrigin out;
  out.plane_from_board = cv::Matx33d(x_b[0], x_b[1], -x_min, up_b[0], up_b[1], -y_min + y_lowest_row_m, 0, 0, 1);
  // Lowest corner row in the image: the corners with the smallest y_m.
  double v_sum = 0;
  int n = 0;
  for (size_t i = 0; i < board_2d.size(); ++i) {
    if (std::abs(up_b[0] * board_2d[i].x + up_b[1] * board_2d[i].y - y_min) < 1e-9) {
      v_sum += corners_px[i].y;
      ++n;
    }
  }
  out.lowest_corner_row_px = v_sum / n;
  return out;
}

PlanePose PlaneViewPose(const std::vector<cv::Point2f>& corners_px, const BoardSpec& board,
                        const cv::Matx33d& plane_from_board, const LensModel& lens) {
  // Pose of the frame in which plane point (x_m, y_m) is (x_m, -y_m, 0).
  std::vector<cv::Point3d> obj;
  for (const cv::Point2f& b : BoardPoints2d(board)) {
    const cv::Vec3d p = plane_from_board * cv::Vec3d(b.x, b.y, 1.0);
    obj.emplace_back(p[0], -p[1], 0.0);
  }
  PlanePose pose;
  std::vector<cv::Point2d> img(corners_px.begin(), corners_px.end());
  cv::solvePnP(obj, img, lens.camera_matrix, lens.distortion, pose.rvec_rad, pose.tvec_m);
  return pose;
}

double TiltSpreadDeg(const std::vector<cv::Mat>& rvecs) {
  std::vector<cv::Vec3d> normals;
  for (const cv::Mat& r : rvecs) {
    cv::Matx33d rot;
    cv::Rodrigues(r, rot);
    normals.emplace_back(rot(0, 2), rot(1, 2), rot(2, 2));
  }
  double spread = 0;
  for (size_t i = 0; i < normals.size(); ++i) {
    for (size_t j = i + 1; j < normals.size(); ++j) {
      const double c = std::clamp(normals[i].dot(normals[j]), -1.0, 1.0);
      spread = std::max(spread, std::acos(c) * 180.0 / kPi);
    }
  }
  return spread;
}

double CoverageFraction(const std::vector<std::vector<cv::Point2f>>& quads, cv::Size size) {
  constexpr int kCells = 20;
  int covered = 0;
  for (int gy = 0; gy < kCells; ++gy) {
    for (int gx = 0; gx < kCells; ++gx) {
      const cv::Point2f p((gx + 0.5f) * static_cast<float>(size.width) / kCells - 0.5f,
                          (gy + 0.5f) * static_cast<float>(size.height) / kCells - 0.5f);
      for (const auto& q : quads) {
        if (cv::pointPolygonTest(q, p, false) >= 0) {
          ++covered;
          break;
        }
      }
    }
  }
  return covered / static_cast<double>(kCells * kCells);
}

PlaneViewFigures MeasurePlaneView(const Rig& rig, const std::vector<cv::Point2f>& corners_px, const BoardSpec& board) {
  const cv::Size size = rig.image_size;
  PlaneViewFigures out;
  std::vector<double> err_mm;
  const auto pair_error = [&](size_t a, size_t b) {
    const cv::Point2d pa = PlaneFromImage(rig, corners_px[a]), pb = PlaneFromImage(rig, corners_px[b]);
    err_mm.push_back(std::abs(cv::norm(pa - pb) - board.square_m) * 1e3);
  };
  for (int j = 0; j < board.rows; ++j) {
    for (int i = 0; i < board.columns; ++i) {
      const size_t k = static_cast<size_t>(j * board.columns + i);
      if (i + 1 < board.columns) pair_error(k, k + 1);
      if (j + 1 < board.rows) pair_error(k, k + static_cast<size_t>(board.columns));
    }
  }
  out.square_error_mean_mm = std::accumulate(err_mm.begin(), err_mm.end(), 0.0) / static_cast<double>(err_mm.size());
  out.square_error_max_mm = *std::max_element(err_mm.begin(), err_mm.end());
  out.metres_per_px_centre = MetresPerPxAt(rig, cv::Point2d(0.5 * (size.width - 1), 0.5 * (size.height - 1)));
  const std::vector<cv::Point2f> quad = OuterQuad(corners_px, board);
  out.board_coverage_fraction = cv::contourArea(quad) / (static_cast<double>(size.width) * size.height);
  return out;
}

namespace {

// (M + M^T) / 2 inverted after scaling to unit diagonal (the parameters differ by orders of
// magnitude); the pseudo-inverse (SVD) where it is singular.
cv::Mat InverseNormalMatrix(const cv::Mat& jtj) {
  const int n = jtj.rows;
  cv::Mat scale = cv::Mat::zeros(n, n, CV_64F);
  for (int i = 0; i < n; ++i) {
    const double d = jtj.at<double>(i, i);
    scale.at<double>(i, i) = d > 0 ? 1.0 / std::sqrt(d) : 0.0;
  }
  const cv::Mat scaled = scale * jtj * scale;
  cv::Mat inv;
  cv::invert(0.5 * (scaled + scaled.t()), inv, cv::DECOMP_SVD);
  return scale * inv * scale;
}

// The 2N x 8 Jacobian of the board's corners projected by h (h33 = 1) with respect to
// h11 h12 h13 h21 h22 h23 h31 h32.
cv::Mat HomographyJacobian(const cv::Matx33d& h, const BoardSpec& board) {
  const std::vector<cv::Point2f> pts = BoardPoints2d(board);
  cv::Mat j = cv::Mat::zeros(2 * static_cast<int>(pts.size()), 8, CV_64F);
  for (size_t i = 0; i < pts.size(); ++i) {
    const double x = pts[i].x, y = pts[i].y;
    const double w = h(2, 0) * x + h(2, 1) * y + h(2, 2);
    const double u = (h(0, 0) * x + h(0, 1) * y + h(0, 2)) / w;
    const double v = (h(1, 0) * x + h(1, 1) * y + h(1, 2)) / w;
    double* ru = j.ptr<double>(2 * static_cast<int>(i));
    double* rv = j.ptr<double>(2 * static_cast<int>(i) + 1);
    ru[0] = x / w, ru[1] = y / w, ru[2] = 1 / w, ru[6] = -u * x / w, ru[7] = -u * y / w;
    rv[3] = x / w, rv[4] = y / w, rv[5] = 1 / w, rv[6] = -v * x / w, rv[7] = -v * y / w;
  }
  return j;
}

// Undistorted pixels (same camera matrix) of `points` through intrinsics
// (fx fy cx cy k1 k2 p1 p2 k3).
std::vector<cv::Point2d> Undistort(const std::vector<cv::Point2d>& points, const std::vector<double>& theta) {
  const cv::Matx33d k(theta[0], 0, theta[2], 0, theta[1], theta[3], 0, 0, 1);
  const std::vector<double> dist(theta.begin() + 4, theta.end());
  std::vector<cv::Point2d> out;
  cv::undistortPoints(points, out, k, dist, cv::noArray(), k,
                      cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 100, 1e-12));
  return out;
}

}  // namespace

double CornerSdFromRms(double rms_px, size_t corners, size_t parameters) {
  const double coordinates = 2.0 * static_cast<double>(corners);
  if (!(coordinates > static_cast<double>(parameters))) {
    throw std::invalid_argument("CornerSdFromRms: " + std::to_string(corners) + " corners cannot fit " +
                                std::to_string(parameters) + " parameters with residuals to spare");
  }
  // rms_px is of the residual distance: RSS = corners x rms^2 over 2 x corners coordinates.
  return rms_px * std::sqrt(static_cast<double>(corners) / (coordinates - static_cast<double>(parameters)));
}

cv::Mat HomographyCovariance(const cv::Matx33d& undistorted_from_board, const BoardSpec& board, double corner_sd_px) {
  const cv::Matx33d h = undistorted_from_board * (1.0 / undistorted_from_board(2, 2));
  const cv::Mat j = HomographyJacobian(h, board);
  return corner_sd_px * corner_sd_px * InverseNormalMatrix(j.t() * j);
}

LensCovariance LensIntrinsicsCovariance(const LensFit& fit, const std::vector<std::vector<cv::Point2f>>& corners_px,
                                        const BoardSpec& board) {
  if (corners_px.size() != fit.rvecs.size()) {
    throw std::invalid_argument("LensIntrinsicsCovariance: " + std::to_string(corners_px.size()) +
                                " corner sets for a fit of " + std::to_string(fit.rvecs.size()) + " views");
  }
  constexpr int kIntrinsics = 9;  // fx fy cx cy k1 k2 p1 p2 k3
  const int terms = static_cast<int>(std::count(fit.terms.begin(), fit.terms.end(), ',')) + 1;
  const int n_intr = 4 + terms;
  const int views = static_cast<int>(corners_px.size());
  const int n_params = n_intr + 6 * views;
  size_t corners = 0;
  for (const auto& c : corners_px) corners += c.size();
  cv::Mat j = cv::Mat::zeros(2 * static_cast<int>(corners), n_params, CV_64F);
  const std::vector<cv::Point3f> object_f = BoardPoints3d(board);
  const std::vector<cv::Point3d> object(object_f.begin(), object_f.end());
  double rss = 0;
  int row = 0;
  for (int v = 0; v < views; ++v) {
    std::vector<cv::Point2d> projected;
    cv::Mat jv;  // 2n x (3 rvec, 3 tvec, 2 focal, 2 centre, 5 distortion)
    cv::projectPoints(object, fit.rvecs[static_cast<size_t>(v)], fit.tvecs[static_cast<size_t>(v)], fit.camera_matrix,
                      fit.distortion, projected, jv);
    const auto& c = corners_px[static_cast<size_t>(v)];
    for (size_t i = 0; i < c.size(); ++i) {
      const cv::Point2d d = projected[i] - cv::Point2d(c[i]);
      rss += d.dot(d);
      for (int r = 0; r < 2; ++r, ++row) {
        const double* src = jv.ptr<double>(2 * static_cast<int>(i) + r);
        double* dst = j.ptr<double>(row);
        for (int k = 0; k < n_intr; ++k) dst[k] = src[6 + k];
        for (int k = 0; k < 6; ++k) dst[n_intr + 6 * v + k] = src[k];
      }
    }
  }
  LensCovariance out;
  const double sigma =
      CornerSdFromRms(std::sqrt(rss / static_cast<double>(corners)), corners, static_cast<size_t>(n_params));
  out.corner_sd_px = sigma;
  const cv::Mat inv = InverseNormalMatrix(j.t() * j);
  out.intrinsics = cv::Mat::zeros(kIntrinsics, kIntrinsics, CV_64F);
  inv(cv::Rect(0, 0, n_intr, n_intr)).copyTo(out.intrinsics(cv::Rect(0, 0, n_intr, n_intr)));
  out.intrinsics *= sigma * sigma;
  return out;
}

RigUncertainty EstimateRigUncertainty(const Rig& rig, const std::vector<cv::Point2f>& corners_px,
                                      const BoardSpec& board, const PlaneHomography& homography,
                                      const cv::Matx33d& plane_from_board, const std::optional<LensCovariance>& lens,
                                      double corner_height_sd_m) {
  if (rig.lens.has_value() != lens.has_value() || (rig.lens && rig.lens->distortion.size() != 5)) {
    throw std::invalid_argument(
        "EstimateRigUncertainty: the rig's lens (5 distortion coefficients) and the lens covariance go together");
  }
  RigUncertainty u;
  u.corner_height_sd_m = corner_height_sd_m;
  u.parameters = MappingParameterNames(rig);
  const size_t n_corners = corners_px.size();
  // Step 1: the homography's noise.
  const cv::Matx33d h = homography.undistorted_from_board * (1.0 / homography.undistorted_from_board(2, 2));
  u.plane_corner_sd_px = CornerSdFromRms(homography.rms_px, n_corners, 8);
  const cv::Mat jh = HomographyJacobian(h, board);
  const cv::Mat jtj_inv = InverseNormalMatrix(jh.t() * jh);
  cv::Mat cov_h = u.plane_corner_sd_px * u.plane_corner_sd_px * jtj_inv;
  // Step 3's A = dg/dh: G = P_b H^-1, dG = -G dH H^-1, g = G / G33.
  const cv::Matx33d h_inv = h.inv();
  const cv::Matx33d g_un = plane_from_board * h_inv;
  cv::Mat a(8, 8, CV_64F);
  for (int k = 0; k < 8; ++k) {
    cv::Matx33d e = cv::Matx33d::zeros();
    e.val[k] = 1.0;
    const cv::Matx33d dg_un = -(g_un * e * h_inv);
    for (int i = 0; i < 8; ++i) {
      a.at<double>(i, k) = dg_un.val[i] / g_un(2, 2) - g_un.val[i] * dg_un(2, 2) / (g_un(2, 2) * g_un(2, 2));
    }
  }
  const int n = static_cast<int>(u.parameters.size());
  cv::Mat cov = cv::Mat::zeros(n, n, CV_64F);
  if (lens) {
    // Step 2: the lens' intrinsics move the undistorted corners, and so the homography.
    u.lens_corner_sd_px = lens->corner_sd_px;
    const cv::Mat& cov_t = lens->intrinsics;
    const std::vector<double> theta = MappingParameters(rig);
    const std::vector<double> theta0(theta.begin() + 8, theta.end());
    const std::vector<cv::Point2d> measured(corners_px.begin(), corners_px.end());
    cv::Mat d = cv::Mat::zeros(2 * static_cast<int>(n_corners), cov_t.cols, CV_64F);
    for (int k = 0; k < cov_t.cols; ++k) {
      const double var = cov_t.at<double>(k, k);
      if (!(var > 0)) continue;
      const double step = 0.1 * std::sqrt(var);
      std::vector<double> tp = theta0, tm = theta0;
      tp[static_cast<size_t>(k)] += step;
      tm[static_cast<size_t>(k)] -= step;
      const std::vector<cv::Point2d> up = Undistort(measured, tp), um = Undistort(measured, tm);
      for (size_t i = 0; i < n_corners; ++i) {
        d.at<double>(2 * static_cast<int>(i), k) = (up[i].x - um[i].x) / (2 * step);
        d.at<double>(2 * static_cast<int>(i) + 1, k) = (up[i].y - um[i].y) / (2 * step);
      }
    }
    const cv::Mat s = jtj_inv * jh.t() * d;  // dh / dtheta (8 x 9)
    cov_h += s * cov_t * s.t();
    const cv::Mat cross = a * s * cov_t;  // Sigma_g,theta
    cross.copyTo(cov(cv::Rect(8, 0, cov_t.cols, 8)));
    cv::Mat(cross.t()).copyTo(cov(cv::Rect(0, 8, 8, cov_t.cols)));
    cov_t.copyTo(cov(cv::Rect(8, 8, cov_t.cols, cov_t.rows)));
  }
  cv::Mat(a * cov_h * a.t()).copyTo(cov(cv::Rect(0, 0, 8, 8)));
  cov = 0.5 * (cov + cov.t());
  u.covariance.assign(cov.begin<double>(), cov.end<double>());
  Rig with = rig;
  with.uncertainty = u;
  SummariseUncertainty(with);
  return *with.uncertainty;
}

namespace {

// What a step of Calibrate says besides its result.
struct StepReport {
  std::optional<std::string> refusal;  // why the calibration stops, and what to do; absent: go on
  std::vector<std::string> warnings;
  std::vector<std::string> notes;
};

struct DetectedView {
  std::string name;
  BoardDetection detection;
};

// Step 1's result: the board found in each view.
struct ViewDetections {
  BoardDetection plane;               // the plane view
  std::vector<DetectedView> usable;   // lens views with a sharp board (the plane view left out by name)
  std::vector<std::string> no_board;  // lens views without a board
  std::vector<std::string> blurred;   // lens views left out as blurred
  std::vector<std::string> dropped;   // per blurred view: "<name>: blurred (...)", for RigQuality::dropped_views
  size_t lens_images = 0;             // lens views looked at
};

// Step 1: the board in the plane view and in every lens view; blurred views are left out.
ViewDetections DetectViews(const std::vector<CalibrationImage>& views, const CalibrationImage& plane,
                           const CalibrateOptions& options) {
  const auto detect = [&](const cv::Mat& grey) {
    return DetectBoard(grey, options.board, options.subpix_half_window_px);
  };
  ViewDetections found;
  found.plane = detect(plane.grey);
  for (const CalibrationImage& v : views) {
    if (v.name == plane.name) continue;
    ++found.lens_images;
    BoardDetection d = detect(v.grey);
    if (!d.found) {
      found.no_board.push_back(v.name);
    } else if (d.blur_px > options.max_blur_px) {
      found.blurred.push_back(v.name);
      found.dropped.push_back(v.name + ": blurred (edge blur " + Fmt(d.blur_px, 1) + " px, limit " +
                              Num(options.max_blur_px) + " px)");
    } else {
      found.usable.push_back({v.name, std::move(d)});
    }
  }
  return found;
}

// Step 1's gates: refused when no image shows the board (naming a nearby board size that one
// shows), when the plane view shows none, or when the plane view is blurred (unless forced).
StepReport JudgeDetections(const ViewDetections& found, const std::vector<CalibrationImage>& views,
                           const CalibrationImage& plane, const CalibrateOptions& options) {
  StepReport report;
  const std::string board_text = BoardSizeToString(options.board);
  if (!found.plane.found && found.no_board.size() == found.lens_images) {
    std::vector<const CalibrationImage*> all_images{&plane};
    for (const CalibrationImage& v : views) {
      if (v.name != plane.name) all_images.push_back(&v);
    }
    const std::string msg = "no checkerboard with " + board_text + " inner corners was found in any of the " +
                            Plural(all_images.size(), "image", "images");
    if (const auto other = FindOtherBoardSize(all_images, options.board)) {
      report.refusal = msg + ", but one with " + BoardSizeToString(other->first) + " inner corners was found in " +
                       other->second + ": pass --board " + BoardSizeToString(other->first) +
                       " (inner corners, not squares)";
    } else {
      report.refusal = msg +
                       "; check --board (count inner corners, not squares: a board of 10 x 7 squares has 9x6 inner "
                       "corners) and that the whole board, with its white border, is in view and in focus";
    }
    return report;
  }
  if (!found.plane.found) {
    report.refusal =
        "no checkerboard with " + board_text + " inner corners was found in the plane view " + plane.name +
        ": the plane view must show the whole board, with its white border, lying in the drop plane; retake it";
    return report;
  }
  // A --board smaller than the board in view is found as a part of it (or as a sheared grid
  // through it) and would make a rig that looks fine but is wrong: refused, naming a size that
  // covers the board when one nearby does.
  if (!DetectionCoversBoard(plane.grey, options.board, found.plane.corners_px)) {
    const std::string msg = "the " + board_text + " inner corners found in the plane view " + plane.name +
                            " are not the whole checkerboard in view (more corners continue beyond them)";
    if (const auto other = FindOtherBoardSize({&plane}, options.board)) {
      report.refusal = msg + ": pass --board " + BoardSizeToString(other->first) + " (inner corners, not squares)";
    } else {
      report.refusal = msg +
                       "; count all inner corners of the board (a board of 10 x 7 squares has 9x6) and pass "
                       "that as --board";
    }
    return report;
  }
  if (found.plane.blur_px > options.max_blur_px) {
    const std::string msg = "the plane view " + plane.name + " is blurred (edge blur " + Fmt(found.plane.blur_px, 1) +
                            " px, limit " + Num(options.max_blur_px) + " px): retake it in focus with the board still";
    if (!options.force) {
      report.refusal = msg + ", or pass --force";
      return report;
    }
    report.warnings.push_back("forced (--force): " + msg);
  }
  // Corners whose fine fits failed keep the coarser estimate (calib/corner_refine.h); named, not judged.
  const auto note_fallbacks = [&report](const std::string& name, const BoardDetection& d) {
    if (d.refine_fallbacks.empty()) return;
    report.notes.push_back(name + ": " + Plural(d.refine_fallbacks.size(), "corner keeps", "corners keep") +
                           " a coarser estimate (" + d.refine_fallbacks.front() +
                           (d.refine_fallbacks.size() > 1 ? "; ..." : "") + ")");
  };
  note_fallbacks(plane.name, found.plane);
  for (const DetectedView& v : found.usable) note_fallbacks(v.name, v.detection);
  if (!found.no_board.empty()) {
    report.notes.push_back("no " + board_text + " board found in " + Plural(found.no_board.size(), "image", "images") +
                           ": " + JoinNames(found.no_board));
    report.warnings.push_back("no " + board_text + " board found in " + std::to_string(found.no_board.size()) + " of " +
                              Plural(found.lens_images, "view", "views") + " (left out): " + JoinNames(found.no_board));
  }
  if (!found.blurred.empty()) {
    report.warnings.push_back(Plural(found.blurred.size(), "view was", "views were") +
                              " left out as blurred (edge blur above " + Num(options.max_blur_px) + " px): " +
                              JoinNames(found.blurred) + "; refocus, shorten the exposure or hold the board still");
  }
  return report;
}

// The rig's fields known before any fit: image size, board, plane view, up side, capture rate,
// version and settings.
Rig StartRig(const CalibrationImage& plane, const CalibrateOptions& options) {
  Rig rig;
  rig.image_size = plane.grey.size();
  rig.board = options.board;
  rig.plane_view = plane.name;
  rig.up = options.up;
  rig.capture_fps = options.capture_fps;
  rig.tool_version = kVersion;
  RecordSettings(options, rig);
  return rig;
}

// Step 2's gate: whether there are views enough for a lens model.
struct LensDecision {
  bool fit_lens = false;
  StepReport report;
};
LensDecision DecideLensFit(const ViewDetections& found, const CalibrateOptions& options) {
  LensDecision decision;
  StepReport& report = decision.report;
  const size_t n_usable = found.usable.size() + 1;  // the plane view is a lens view too
  decision.fit_lens = found.lens_images > 0;
  if (!decision.fit_lens) {
    report.warnings.push_back(
        "no lens model (only the plane view was given): lens distortion is not corrected, so positions away from "
        "the plane view's board can be off by several pixels, most near the frame's edges, and the rig cannot tell "
        "by how much; give 10-20 further views of the board at different positions and tilts for a lens model");
  } else if (n_usable < static_cast<size_t>(options.min_lens_views)) {
    std::string msg = "only " + Plural(n_usable, "usable view", "usable views") + " of the board (need " +
                      std::to_string(options.min_lens_views) + " for a lens model)";
    if (!found.no_board.empty()) msg += "; no board in " + Plural(found.no_board.size(), "image", "images");
    if (!found.blurred.empty()) {
      msg += "; " + std::to_string(found.blurred.size()) + " too blurred (edge blur above " + Num(options.max_blur_px) +
             " px: refocus, shorten the exposure or hold the board still)";
    }
    msg += ": add views of the board at different positions and tilts (20-40 degrees) over the whole frame";
    if (!options.force) {
      report.refusal = msg + ", or pass --force to accept a weaker calibration";
    } else if (n_usable < static_cast<size_t>(kFewestLensViews)) {
      decision.fit_lens = false;
      report.warnings.push_back("forced (--force): " + msg +
                                "; too few for any lens model, so none is used and lens distortion is not corrected");
    } else {
      report.warnings.push_back("forced (--force): " + msg);
    }
  }
  return decision;
}

// Step 2: the lens fit on the plane view and the usable views, its gate on the overall RMS
// reprojection error, and the lens quality figures. Sets rig.lens and the lens' rig.quality
// fields, and appends the views left out to rig.quality.dropped_views.
StepReport FitLensModel(const ViewDetections& found, const CalibrationImage& plane, const CalibrateOptions& options,
                        Rig& rig, std::optional<LensCovariance>& lens_covariance) {
  std::vector<std::string> names{plane.name};
  std::vector<std::vector<cv::Point2f>> image_pts{found.plane.corners_px};
  for (const DetectedView& v : found.usable) {
    names.push_back(v.name);
    image_pts.push_back(v.detection.corners_px);
  }
  LensFitWithoutOutliers lens =
      FitLensWithoutOutliers(std::move(names), std::move(image_pts), options.board, rig.image_size,
                             options.outlier_factor, options.outlier_floor_px);
  StepReport report;
  report.warnings = lens.warnings;
  rig.quality.dropped_views.insert(rig.quality.dropped_views.end(), lens.dropped.begin(), lens.dropped.end());
  const LensFit& fit = lens.fit;
  if (fit.rms_px > options.max_rms_px) {
    const std::string msg = "the overall RMS reprojection error is " + Fmt(fit.rms_px, 2) + " px (limit " +
                            Num(options.max_rms_px) +
                            " px): the corners do not fit one lens model; check that every view shows the same "
                            "flat board and that zoom and focus did not change between views";
    if (!options.force) {
      report.refusal = msg + ", or pass --force";
      return report;
    }
    report.warnings.push_back("forced (--force): " + msg);
  } else if (fit.rms_px > options.warn_rms_px) {
    report.warnings.push_back(
        "the overall RMS reprojection error is " + Fmt(fit.rms_px, 2) + " px (above " + Num(options.warn_rms_px) +
        " px): expect position errors of that order; sharper views and a flatter board improve it");
  }
  lens_covariance = LensIntrinsicsCovariance(fit, lens.corners_px, options.board);
  LensModel model;
  model.camera_matrix = fit.camera_matrix;
  model.distortion = fit.distortion;
  rig.lens = model;
  RigQuality& q = rig.quality;
  q.rms_reprojection_px = fit.rms_px;
  q.view_names = lens.names;
  q.view_rms_px = fit.view_rms_px;
  q.distortion_terms = fit.terms;
  q.tilt_spread_deg = TiltSpreadDeg(fit.rvecs);
  std::vector<std::vector<cv::Point2f>> lens_quads;
  for (const auto& pts : lens.corners_px) lens_quads.push_back(OuterQuad(pts, options.board));
  q.views_coverage_fraction = CoverageFraction(lens_quads, rig.image_size);
  if (q.tilt_spread_deg < options.min_tilt_spread_deg) {
    report.warnings.push_back(
        "the views' board tilts span only " + Fmt(q.tilt_spread_deg, 1) + " degrees (below " +
        Num(options.min_tilt_spread_deg) +
        "): focal length and distortion are poorly separated; add views with the board tilted 20-40 degrees "
        "about both axes");
  }
  if (q.views_coverage_fraction < options.min_views_coverage_fraction) {
    report.warnings.push_back("the lens views' boards cover " + Fmt(100 * q.views_coverage_fraction, 0) +
                              " % of the frame (below " + Num(100 * options.min_views_coverage_fraction) +
                              " %): distortion near the uncovered edges is extrapolated; add views with the board "
                              "near the frame's edges and corners");
  }
  return report;
}

// What step 3 fitted, for step 5.
struct PlaneFit {
  std::optional<PlaneHomography> homography;
  cv::Matx33d plane_from_board;
};

// Step 3: the plane view's mapping, up axis, floor and pose, into `rig` (after step 2).
StepReport MapPlane(const std::vector<cv::Point2f>& corners_px, const CalibrateOptions& options, Rig& rig,
                    PlaneFit& fit) {
  StepReport report;
  const std::optional<PlaneHomography> h = FitPlaneHomography(corners_px, options.board, rig.lens);
  fit.homography = h;
  if (!h) {
    report.refusal = "the plane view's corners gave no plane mapping (degenerate board detection); retake it";
    return report;
  }
  rig.quality.plane_rms_px = h->rms_px;
  const BoardAxes axes = FindBoardAxes(h->undistorted_from_board, options.board, options.up);
  if (axes.off_up_deg > 30.0) {
    report.warnings.push_back(
        "the plane view's board is turned " + Fmt(axes.off_up_deg, 0) + " degrees from the image's " +
        ToString(options.up) +
        " side; the vertical is taken from the board's edges, so the board must stand upright in the drop plane");
  }
  const PlaneOrigin origin = PlaceOrigin(corners_px, options.board, axes, options.corner_height_m);
  fit.plane_from_board = origin.plane_from_board;
  rig.plane_from_undistorted = origin.plane_from_board * h->undistorted_from_board.inv();
  rig.plane_from_undistorted *= 1.0 / rig.plane_from_undistorted(2, 2);
  if (options.corner_height_m) {
    rig.y_origin = YOrigin::kFloor;
    rig.corner_height_m = options.corner_height_m;
  }
  rig.quality.lowest_corner_row_px = origin.lowest_corner_row_px;
  if (rig.lens) {
    const PlanePose pose = PlaneViewPose(corners_px, options.board, origin.plane_from_board, *rig.lens);
    rig.plane_rvec_rad = pose.rvec_rad;
    rig.plane_tvec_m = pose.tvec_m;
  }
  return report;
}

// Step 4: the plane view's quality figures, in the user's units, into rig.quality (after step 3).
StepReport MeasureQuality(const std::vector<cv::Point2f>& corners_px, const CalibrateOptions& options, Rig& rig) {
  StepReport report;
  const PlaneViewFigures figures = MeasurePlaneView(rig, corners_px, options.board);
  RigQuality& q = rig.quality;
  q.square_error_mean_mm = figures.square_error_mean_mm;
  q.square_error_max_mm = figures.square_error_max_mm;
  q.metres_per_px_centre = figures.metres_per_px_centre;
  q.board_coverage_fraction = figures.board_coverage_fraction;
  if (!rig.lens) q.views_coverage_fraction = CoverageFraction({OuterQuad(corners_px, options.board)}, rig.image_size);
  if (q.board_coverage_fraction < options.min_board_coverage_fraction) {
    report.warnings.push_back("the plane view's board covers " + Fmt(100 * q.board_coverage_fraction, 1) +
                              " % of the frame (below " + Num(100 * options.min_board_coverage_fraction) +
                              " %): positions far from it are extrapolated; use a larger board or place it where "
                              "the specimen moves");
  }
  return report;
}

}  // namespace

CalibrationOutcome Calibrate(const std::vector<CalibrationImage>& views, const CalibrationImage& plane,
                             const CalibrateOptions& options) {
  if (const auto problem = ValidateCalibrateOptions(options)) throw std::invalid_argument(*problem);
  if (plane.grey.empty()) throw std::invalid_argument("the plane view " + plane.name + " is empty");
  const cv::Size size = plane.grey.size();
  CheckImage(plane, size);
  for (const CalibrationImage& v : views) CheckImage(v, size);

  CalibrationOutcome out;
  // Takes a step's warnings and notes; false when the step refused (the refusal is then set).
  const auto go_on = [&out](const StepReport& report) {
    out.warnings.insert(out.warnings.end(), report.warnings.begin(), report.warnings.end());
    out.notes.insert(out.notes.end(), report.notes.begin(), report.notes.end());
    if (report.refusal) out.refusal = *report.refusal;
    return !report.refusal;
  };

  // 1. Corners.
  const ViewDetections found = DetectViews(views, plane, options);
  if (!go_on(JudgeDetections(found, views, plane, options))) return out;

  // 2. Lens model.
  Rig rig = StartRig(plane, options);
  rig.quality.dropped_views = found.dropped;
  const LensDecision decision = DecideLensFit(found, options);
  if (!go_on(decision.report)) return out;
  std::optional<LensCovariance> lens_covariance;
  if (decision.fit_lens && !go_on(FitLensModel(found, plane, options, rig, lens_covariance))) return out;

  // 3. The plane: homography board -> undistorted pixels, then board -> plane metres.
  PlaneFit plane_fit;
  if (!go_on(MapPlane(found.plane.corners_px, options, rig, plane_fit))) return out;

  // 4. Figures in the user's units.
  go_on(MeasureQuality(found.plane.corners_px, options, rig));

  // 5. The mapping's uncertainty.
  rig.uncertainty = EstimateRigUncertainty(rig, found.plane.corners_px, options.board, *plane_fit.homography,
                                           plane_fit.plane_from_board, lens_covariance, options.corner_height_sd_m);

  rig.warnings = out.warnings;
  if (const auto problem = ValidateRig(rig)) {
    out.refusal = "the calibration gave an unusable rig: " + *problem;
    return out;
  }
  out.rig = std::move(rig);
  return out;
}

}  // namespace dropfit::calib
