// Corner-refiner benchmark (issue 14, item 1): how close each way of refining checkerboard corners
// comes to the renderer's exact corners, on rendered calibration images.
//
//   corner_bench [--seeds N] [--sweep]
//
// Images: synth::RenderCalibrationImages (10 tilted lens views + the plane view per seed) under
//   A    the `dropfit render` defaults (800x640, f = 1200 px, 1.2 m: 1.0 mm/px in the drop plane;
//        9x6 board of 50 mm squares; read noise 2 grey levels, shot noise, vignetting, lens blur
//        0.5 px): the reference conditions;
//   B    the same camera at 1.44 m (1.2 mm/px) with a 9x6 board of 25 mm squares (plane-view
//        squares ~21 px);
// each at the reference read noise ("ref"), twice it ("2x read") and without noise ("clean").
// Truth: the renderer's exact inner corners (synth/render_calibration.h), matched to the
// detection's order (which may run from the other end).
// Refiners, all from the same cv::findChessboardCornersSB detection except the ACCURACY row, with
// the half window h that DetectBoard uses (calib::SaddleHalfWindowPx with its cap, 9 px: 0.4 x
// the smallest square height, so 9 px on the lens views and A's plane view, 8 px on B's):
//   SB                   findChessboardCornersSB(NORMALIZE_IMAGE) as found, no refinement
//   SB+ACCURACY          findChessboardCornersSB(NORMALIZE_IMAGE | ACCURACY): OpenCV's own
//                        up-sampled refinement (time: its whole detection per corner)
//   cornerSubPix         what DetectBoard did before: cv::cornerSubPix, half window
//                        clamp(0.4 x row spacing, 2, 5), 50 iterations / 1e-3
//   saddle               the saddle-point fit alone (Lucchese & Mitra 2002; calib::
//                        RefineCornersBySaddle, docs/methods.md §16a) from cornerSubPix
//   point symmetry       tracker::SymmetryFitter (the hub-marker fit, tracker/symmetry_fit.h),
//                        window radius h, from cornerSubPix
//   X-corner (Ceres)     the blurred X-corner model (3) of calib/corner_refine.h fitted by Ceres
//                        (autodiff, dense QR) from the saddle fit: a cross-check of our own
//                        Levenberg-Marquardt, which must land on the same corners
//   ours                 calib::RefineCorners: saddle fit, then the X-corner fit (3), from
//                        cornerSubPix: what DetectBoard runs
//   DetectBoard          calib::DetectBoard end to end (time includes the detection)
// Rows "<condition> pl" repeat cornerSubPix and ours on the plane views only.
// Columns: corners, mean and RMS of |error| [px], worst [px], refinement CPU time per corner
// [us], fits that fell back, corners where the refiner is worse than cornerSubPix (count, and
// the largest excess [px]), and the mean signed error (du, dv) [px].
// --sweep: ours and the saddle alone over the window cap and the saddle's smoothing, on A at
// the reference noise. A benchmark, not a test: nothing is asserted.

#include <ceres/ceres.h>
#include <opencv2/calib3d.hpp>
#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <ctime>
#include <functional>
#include <string>
#include <vector>

#include "calib/calibrate.h"
#include "calib/corner_refine.h"
#include "synth/camera.h"
#include "synth/render.h"
#include "synth/render_calibration.h"
#include "synth/render_plan.h"
#include "tracker/symmetry_fit.h"

namespace {

using namespace dropfit;

double ThreadCpuSeconds() {
  timespec ts{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
  return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
}

struct View {
  std::string name;
  bool plane = false;
  cv::Mat1b grey;
  std::vector<cv::Point2d> truth;
};

struct Condition {
  std::string name;
  calib::BoardSpec board;
  std::vector<View> views;
};

// Renders the views of one rig at one noise level over `seeds` seeds.
Condition Render(const std::string& name, double distance_m, double square_m, double read_noise_factor, bool noise,
                 int seeds) {
  synth::RenderOptions options;  // the `dropfit render` defaults
  options.camera_distance_m = distance_m;
  options.square_m = square_m;
  const synth::RenderPlan plan = synth::MakePlan(options);
  const synth::PinholeCamera camera = synth::MakeCamera(plan.camera_setup);
  synth::SceneLook scene;
  scene.texture_seed = options.seed * 0x9E3779B97F4A7C15ull + 17;
  const synth::SceneRenderer renderer(camera, plan.wheel, scene);
  synth::ExposureSettings exposure = plan.exposure;
  exposure.read_noise_grey *= read_noise_factor;
  Condition c;
  c.name = name;
  c.board.columns = plan.board.inner_cols;
  c.board.rows = plan.board.inner_rows;
  c.board.square_m = plan.board.square_m;
  for (int s = 0; s < seeds; ++s) {
    for (synth::CalibrationImage& image :
         synth::RenderCalibrationImages(renderer, plan.board, options.lens_views, exposure, noise, 1000 + s)) {
      c.views.push_back({image.name, image.drop_plane, image.image, image.inner_corners_px});
    }
  }
  return c;
}

bool FindSb(const cv::Mat& grey, const calib::BoardSpec& b, int flags, std::vector<cv::Point2f>& corners) {
  return cv::findChessboardCornersSB(grey, cv::Size(b.columns, b.rows), corners, flags);
}

// The detection in the truth's order: of the grid's four flips (rows and/or columns reversed),
// the one closest to the truth; false when even that is off (mean distance above 2 px).
bool Align(std::vector<cv::Point2f>& corners, const std::vector<cv::Point2d>& truth, const calib::BoardSpec& b) {
  if (corners.size() != truth.size()) return false;
  double best = INFINITY;
  std::vector<cv::Point2f> best_order;
  for (int flip = 0; flip < 4; ++flip) {
    std::vector<cv::Point2f> order(corners.size());
    double sum = 0;
    for (int j = 0; j < b.rows; ++j) {
      for (int i = 0; i < b.columns; ++i) {
        const int jj = (flip & 1) ? b.rows - 1 - j : j, ii = (flip & 2) ? b.columns - 1 - i : i;
        const size_t k = static_cast<size_t>(j * b.columns + i);
        order[k] = corners[static_cast<size_t>(jj * b.columns + ii)];
        sum += cv::norm(cv::Point2d(order[k]) - truth[k]);
      }
    }
    if (sum < best) {
      best = sum;
      best_order = order;
    }
  }
  corners = best_order;
  return best / static_cast<double>(truth.size()) < 2.0;
}

int CornerSubPixHalf(const std::vector<cv::Point2f>& c, const calib::BoardSpec& board) {
  double spacing = INFINITY;
  for (int j = 0; j < board.rows; ++j) {
    for (int i = 0; i + 1 < board.columns; ++i) {
      const size_t k = static_cast<size_t>(j * board.columns + i);
      spacing = std::min(spacing, cv::norm(c[k + 1] - c[k]));
    }
  }
  return std::clamp(static_cast<int>(0.4 * spacing), 2, 5);
}

// --- The X-corner model fit (Ceres) ---

struct XCornerResidual {
  double u, v, value;
  template <typename T>
  bool operator()(const T* centre, const T* angles, const T* look, T* r) const {
    using std::cos;
    using std::erf;
    using std::sin;
    const T dx = T(u) - centre[0], dy = T(v) - centre[1];
    const T s1 = -sin(angles[0]) * dx + cos(angles[0]) * dy;
    const T s2 = -sin(angles[1]) * dx + cos(angles[1]) * dy;
    const T k = T(1) / (T(std::sqrt(2.0)) * look[0]);
    r[0] = look[1] + look[2] * erf(s1 * k) * erf(s2 * k) - T(value);
    return true;
  }
};

// Edge directions [rad] of the asymptotes of a saddle a x^2 + b x y + c y^2 (zero set).
bool Asymptotes(const calib::QuadraticSurface& q, double& phi1, double& phi2) {
  const double a0 = (q.a + q.c) / 2, a1 = (q.a - q.c) / 2, b1 = q.b / 2;
  const double r = std::hypot(a1, b1);
  if (!(r > std::abs(a0))) return false;
  const double psi = std::atan2(b1, a1), delta = std::acos(-a0 / r);
  phi1 = (psi + delta) / 2;
  phi2 = (psi - delta) / 2;
  return true;
}

// One corner by model (3) fitted with Ceres from a saddle fit; false (start kept) when it fails.
bool CeresXCorner(const cv::Mat1d& raw, const calib::SaddleFit& sf, int half, cv::Point2d& out) {
  double phi[2];
  if (!Asymptotes(sf.surface, phi[0], phi[1])) return false;
  const cv::Point2d start = sf.point_px;
  const int u0 = static_cast<int>(std::ceil(start.x - half)), u1 = static_cast<int>(std::floor(start.x + half));
  const int v0 = static_cast<int>(std::ceil(start.y - half)), v1 = static_cast<int>(std::floor(start.y + half));
  if (u0 < 0 || v0 < 0 || u1 >= raw.cols || v1 >= raw.rows) return false;
  double lo = 1e9, hi = -1e9, sum = 0;
  int n = 0;
  ceres::Problem problem;
  double centre[2] = {start.x, start.y};
  double look[3] = {1.0, 0.0, 0.0};
  for (int v = v0; v <= v1; ++v) {
    for (int u = u0; u <= u1; ++u) {
      if (std::hypot(u - start.x, v - start.y) > half) continue;
      lo = std::min(lo, raw(v, u));
      hi = std::max(hi, raw(v, u));
      sum += raw(v, u);
      ++n;
      problem.AddResidualBlock(new ceres::AutoDiffCostFunction<XCornerResidual, 1, 2, 2, 3>(
                                   new XCornerResidual{static_cast<double>(u), static_cast<double>(v), raw(v, u)}),
                               nullptr, centre, phi, look);
    }
  }
  // Sign of the amplitude: the quadratic's sign along the bisector against s1 s2 there.
  const cv::Point2d t(std::cos(phi[0]) + std::cos(phi[1]), std::sin(phi[0]) + std::sin(phi[1]));
  const double qt = sf.surface.a * t.x * t.x + sf.surface.b * t.x * t.y + sf.surface.c * t.y * t.y;
  const double s1 = -std::sin(phi[0]) * t.x + std::cos(phi[0]) * t.y,
               s2 = -std::sin(phi[1]) * t.x + std::cos(phi[1]) * t.y;
  look[1] = sum / n;
  look[2] = (qt / (s1 * s2) > 0 ? 1.0 : -1.0) * (hi - lo) / 2;
  problem.SetParameterLowerBound(look, 0, 0.1);
  ceres::Solver::Options options;
  options.linear_solver_type = ceres::DENSE_QR;
  options.max_num_iterations = 50;
  options.function_tolerance = 1e-12;
  options.parameter_tolerance = 1e-10;
  ceres::Solver::Summary summary;
  ceres::Solve(options, &problem, &summary);
  if (summary.termination_type == ceres::FAILURE) return false;
  out = {centre[0], centre[1]};
  return cv::norm(out - start) < 0.5;
}

// --- Scoring ---

struct Score {
  std::vector<double> errors;       // per corner [px]
  std::vector<double> subpix_errs;  // cornerSubPix's error on the same corners
  double sum_dx = 0, sum_dy = 0;
  double cpu_s = 0;
  int fallbacks = 0;
  int views_missed = 0;
};

void Add(Score& s, const std::vector<cv::Point2f>& corners, const std::vector<cv::Point2d>& truth,
         const std::vector<cv::Point2f>& subpix) {
  for (size_t i = 0; i < truth.size(); ++i) {
    s.errors.push_back(cv::norm(cv::Point2d(corners[i]) - truth[i]));
    s.sum_dx += corners[i].x - truth[i].x;
    s.sum_dy += corners[i].y - truth[i].y;
    s.subpix_errs.push_back(cv::norm(cv::Point2d(subpix[i]) - truth[i]));
  }
}

void Print(const std::string& condition, const std::string& refiner, const Score& s) {
  if (s.errors.empty()) {
    std::printf("%-10s %-16s  no corners (views missed %d)\n", condition.c_str(), refiner.c_str(), s.views_missed);
    return;
  }
  double sum = 0, sum2 = 0, worst = 0, excess = 0;
  int worse = 0;
  for (size_t i = 0; i < s.errors.size(); ++i) {
    sum += s.errors[i];
    sum2 += s.errors[i] * s.errors[i];
    worst = std::max(worst, s.errors[i]);
    if (s.errors[i] > s.subpix_errs[i]) {
      ++worse;
      excess = std::max(excess, s.errors[i] - s.subpix_errs[i]);
    }
  }
  const double n = static_cast<double>(s.errors.size());
  std::printf("%-10s %-16s %6zu  %8.4f %8.4f %8.4f  %9.1f  %5d  %5d %8.4f  %+8.4f %+8.4f%s\n", condition.c_str(),
              refiner.c_str(), s.errors.size(), sum / n, std::sqrt(sum2 / n), worst, 1e6 * s.cpu_s / n, s.fallbacks,
              worse, excess, s.sum_dx / n, s.sum_dy / n,
              s.views_missed ? ("  (views missed " + std::to_string(s.views_missed) + ")").c_str() : "");
}

// cornerSubPix as DetectBoard ran it before.
std::vector<cv::Point2f> CornerSubPix(const cv::Mat1b& grey, std::vector<cv::Point2f> corners,
                                      const calib::BoardSpec& board) {
  const int half = CornerSubPixHalf(corners, board);
  cv::cornerSubPix(grey, corners, cv::Size(half, half), cv::Size(-1, -1),
                   cv::TermCriteria(cv::TermCriteria::COUNT | cv::TermCriteria::EPS, 50, 1e-3));
  return corners;
}

constexpr int kWindowCapPx = 9;  // DetectBoard's default (CalibrateOptions::subpix_half_window_px)

void RunTable(const Condition& c) {
  Score sb, acc, subpix, saddle, sym, ceres_x, ours, detect, plane_subpix, plane_ours;
  for (const View& v : c.views) {
    std::vector<cv::Point2f> found;
    double t0 = ThreadCpuSeconds();
    const bool ok = FindSb(v.grey, c.board, cv::CALIB_CB_NORMALIZE_IMAGE, found);
    const double t_sb = ThreadCpuSeconds() - t0;
    if (!ok || !Align(found, v.truth, c.board)) {
      for (Score* s : {&sb, &acc, &subpix, &saddle, &sym, &ceres_x, &ours, &detect}) ++s->views_missed;
      continue;
    }
    sb.cpu_s += t_sb;
    t0 = ThreadCpuSeconds();
    const std::vector<cv::Point2f> sp = CornerSubPix(v.grey, found, c.board);
    subpix.cpu_s += ThreadCpuSeconds() - t0;
    Add(sb, found, v.truth, sp);
    Add(subpix, sp, v.truth, sp);
    if (v.plane) Add(plane_subpix, sp, v.truth, sp);
    const int half = calib::SaddleHalfWindowPx(sp, c.board, kWindowCapPx);

    // The saddle fit alone.
    calib::SaddleOptions so;
    so.half_window_px = half;
    t0 = ThreadCpuSeconds();
    const calib::RefinedCorners rs = calib::RefineCornersBySaddle(v.grey, sp, so);
    saddle.cpu_s += ThreadCpuSeconds() - t0;
    saddle.fallbacks += static_cast<int>(rs.fallbacks.size());
    Add(saddle, rs.corners_px, v.truth, sp);

    // Point symmetry (the tracker's hub-marker fit).
    tracker::SymmetryFitOptions sym_options;
    sym_options.window_radius_px = half;
    sym_options.max_shift_px = 1.0;
    const tracker::SymmetryFitter fitter(sym_options);
    t0 = ThreadCpuSeconds();
    std::vector<cv::Point2f> pc = sp;
    for (size_t i = 0; i < sp.size(); ++i) {
      const tracker::SymmetryFitResult r = fitter.Fit(v.grey, sp[i]);
      if (r.converged) {
        pc[i] = cv::Point2f(static_cast<float>(r.centre_px.x), static_cast<float>(r.centre_px.y));
      } else {
        ++sym.fallbacks;
      }
    }
    sym.cpu_s += ThreadCpuSeconds() - t0;
    Add(sym, pc, v.truth, sp);

    // Ours: saddle, then the X-corner model.
    calib::CornerRefineOptions ro;
    ro.saddle.half_window_px = half;
    ro.xcorner.half_window_px = half;
    t0 = ThreadCpuSeconds();
    const calib::RefinedCorners r = calib::RefineCorners(v.grey, sp, ro);
    ours.cpu_s += ThreadCpuSeconds() - t0;
    ours.fallbacks += static_cast<int>(r.fallbacks.size());
    Add(ours, r.corners_px, v.truth, sp);
    if (v.plane) Add(plane_ours, r.corners_px, v.truth, sp);

    // The same model fitted by Ceres from the same saddle fits.
    t0 = ThreadCpuSeconds();
    cv::Mat1d raw;
    v.grey.convertTo(raw, CV_64F);
    const cv::Mat1d smoothed = calib::SmoothForSaddle(v.grey, so.smoothing_sigma_px);
    std::vector<cv::Point2f> xc = sp;
    for (size_t i = 0; i < sp.size(); ++i) {
      const calib::SaddleFit sf = calib::RefineSaddlePoint(smoothed, sp[i], so);
      cv::Point2d p;
      if (!sf.failure && CeresXCorner(raw, sf, half, p)) {
        xc[i] = cv::Point2f(static_cast<float>(p.x), static_cast<float>(p.y));
      } else {
        ++ceres_x.fallbacks;
      }
    }
    ceres_x.cpu_s += ThreadCpuSeconds() - t0;
    Add(ceres_x, xc, v.truth, sp);

    // The production path end to end.
    t0 = ThreadCpuSeconds();
    calib::BoardDetection d = calib::DetectBoard(v.grey, c.board);
    detect.cpu_s += ThreadCpuSeconds() - t0;
    if (d.found && Align(d.corners_px, v.truth, c.board)) {
      detect.fallbacks += static_cast<int>(d.refine_fallbacks.size());
      Add(detect, d.corners_px, v.truth, sp);
    } else {
      ++detect.views_missed;
    }

    // OpenCV's accuracy flag (a detection of its own).
    std::vector<cv::Point2f> fa;
    t0 = ThreadCpuSeconds();
    const bool ok_a = FindSb(v.grey, c.board, cv::CALIB_CB_NORMALIZE_IMAGE | cv::CALIB_CB_ACCURACY, fa);
    const double t_a = ThreadCpuSeconds() - t0;
    if (ok_a && Align(fa, v.truth, c.board)) {
      acc.cpu_s += t_a;
      Add(acc, fa, v.truth, sp);
    } else {
      ++acc.views_missed;
    }
  }
  Print(c.name, "SB", sb);
  Print(c.name, "SB+ACCURACY", acc);
  Print(c.name, "cornerSubPix", subpix);
  Print(c.name, "saddle", saddle);
  Print(c.name, "point symmetry", sym);
  Print(c.name, "X-corner (Ceres)", ceres_x);
  Print(c.name, "ours", ours);
  Print(c.name, "DetectBoard", detect);
  Print(c.name + " pl", "cornerSubPix", plane_subpix);
  Print(c.name + " pl", "ours", plane_ours);
}

void RunSweep(const Condition& c) {
  std::vector<std::vector<cv::Point2f>> starts(c.views.size());
  for (size_t k = 0; k < c.views.size(); ++k) {
    std::vector<cv::Point2f> found;
    if (!FindSb(c.views[k].grey, c.board, cv::CALIB_CB_NORMALIZE_IMAGE, found) ||
        !Align(found, c.views[k].truth, c.board)) {
      continue;
    }
    starts[k] = CornerSubPix(c.views[k].grey, found, c.board);
  }
  for (int cap : {5, 7, 9, 12}) {
    for (double smooth : {0.7, 1.0, 1.5}) {
      for (bool xcorner : {false, true}) {
        Score s;
        for (size_t k = 0; k < c.views.size(); ++k) {
          if (starts[k].empty()) continue;
          calib::CornerRefineOptions ro;
          ro.saddle.smoothing_sigma_px = smooth;
          ro.saddle.half_window_px = calib::SaddleHalfWindowPx(starts[k], c.board, cap);
          ro.xcorner.half_window_px = ro.saddle.half_window_px;
          ro.fit_xcorner = xcorner;
          const double t0 = ThreadCpuSeconds();
          const calib::RefinedCorners rc = calib::RefineCorners(c.views[k].grey, starts[k], ro);
          s.cpu_s += ThreadCpuSeconds() - t0;
          s.fallbacks += static_cast<int>(rc.fallbacks.size());
          Add(s, rc.corners_px, c.views[k].truth, starts[k]);
        }
        char label[64];
        std::snprintf(label, sizeof label, "%s cap%d s%.1f", xcorner ? "ours" : "saddle", cap, smooth);
        Print(c.name, label, s);
      }
    }
  }
}

}  // namespace

int main(int argc, char** argv) {
  int seeds = 2;
  bool sweep = false;
  for (int i = 1; i < argc; ++i) {
    if (!std::strcmp(argv[i], "--seeds") && i + 1 < argc) {
      seeds = std::atoi(argv[++i]);
    } else if (!std::strcmp(argv[i], "--sweep")) {
      sweep = true;
    } else {
      std::fprintf(stderr, "usage: corner_bench [--seeds N] [--sweep]\n");
      return 2;
    }
  }
  google::InitGoogleLogging(argv[0]);
  FLAGS_minloglevel = 3;
  std::printf("%-10s %-16s %6s  %8s %8s %8s  %9s  %5s  %5s %8s\n", "condition", "refiner", "corners", "mean_px",
              "rms_px", "worst_px", "us/corner", "fallb", "worse", "excess");
  if (sweep) {
    RunSweep(Render("A ref", 1.2, 0.05, 1.0, true, seeds));
    return 0;
  }
  RunTable(Render("A ref", 1.2, 0.05, 1.0, true, seeds));
  RunTable(Render("A 2x read", 1.2, 0.05, 2.0, true, seeds));
  RunTable(Render("A clean", 1.2, 0.05, 1.0, false, 1));
  RunTable(Render("B ref", 1.44, 0.025, 1.0, true, seeds));
  RunTable(Render("B 2x read", 1.44, 0.025, 2.0, true, seeds));
  RunTable(Render("B clean", 1.44, 0.025, 1.0, false, 1));
  return 0;
}
