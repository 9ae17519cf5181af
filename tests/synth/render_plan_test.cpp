// The plan and rendering of a clip set (synth/render_plan.h, synth/render_set.h): the validator
// names the bad option and its range, a small set is planned and drawn clip by clip with the
// names and frame counts its options ask for, its first fall is the free fall of
// docs/methods.md §2, and it is deterministic for a seed whatever order the clips are drawn in.
#include "synth/render_plan.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <stdexcept>
#include <string>

#include "synth/render_set.h"
#include "tests/support/temp_dir.h"

namespace dropfit::synth {
namespace {

namespace fs = std::filesystem;

// A small set: 2 heights x 1 repeat, a small frame and wheel, the first 5 frames of each clip.
RenderOptions SmallSet(const fs::path& out) {
  RenderOptions o;
  o.out_dir = out.string();
  o.image_size = "320x480";
  o.free_radius_m = 0.1;
  o.section_radius_m = 0.02;
  o.marker_diameter_m = 0.02;
  o.heights_m = {0.1, 0.2};
  o.repeats = 1;
  o.seed = 11;
  o.first_frames = 5;
  o.calibration = false;
  o.board = "5x4";
  o.square_m = 0.04;
  return o;
}

TEST(RenderPlan, ValidatorRejectsAnOptionOutsideItsRangeAndNamesTheRange) {
  // Common practice, no source: the message names the option, its value, unit and range.
  RenderOptions o = SmallSet("/unused");
  EXPECT_FALSE(ValidateRenderOptions(o).has_value());
  o.mass_kg = 0;
  ASSERT_TRUE(ValidateRenderOptions(o).has_value());
  EXPECT_EQ(*ValidateRenderOptions(o), "--mass 0 kg is outside (0, 1e4]");
  o = SmallSet("/unused");
  o.repeats = 101;
  EXPECT_EQ(*ValidateRenderOptions(o), "--repeats 101 is outside 1..100");
  // The set's planner refuses the same options with the same message.
  EXPECT_THROW(
      {
        try {
          PlanRenderSet(o);
        } catch (const std::invalid_argument& e) {
          EXPECT_STREQ(e.what(), "--repeats 101 is outside 1..100");
          throw;
        }
      },
      std::invalid_argument);
}

TEST(RenderPlan, OccluderOptionsAreCheckedRecordedOnlyWhenACardIsDrawnAndReadBack) {
  // Common practice, no source: a malformed option is named with the form it expects.
  RenderOptions o = SmallSet("/unused");
  const auto plain = EffectiveOptions(o, MakePlan(o));
  o.occluder = "4-9";
  EXPECT_EQ(*ValidateRenderOptions(o),
            "--occluder '4-9' is not FIRST:LAST, two frame numbers with 0 <= FIRST <= LAST <= 1e7");
  o.occluder = "4:9";
  o.occluder_cover = "0:2";
  EXPECT_EQ(*ValidateRenderOptions(o), "--occluder-cover '0:2' is not FROM:TO, two fractions of the marker in [0, 1]");
  o.occluder_cover = "0.125:1";
  o.occluder_grey = 400;
  EXPECT_EQ(*ValidateRenderOptions(o), "--occluder-grey 400 grey levels is outside [0, 300]");
  o.occluder_grey = 30;
  o.occluder_angle_deg = 45;
  EXPECT_FALSE(ValidateRenderOptions(o).has_value());
  const RenderPlan plan = MakePlan(o);
  EXPECT_EQ(plan.occluder.first_frame, 4);
  EXPECT_EQ(plan.occluder.last_frame, 9);
  EXPECT_EQ(plan.occluder.cover_from, 0.125);
  EXPECT_EQ(plan.occluder.cover_to, 1.0);
  // Without a card the record is as before; with one it names the card and reads back.
  const auto record = EffectiveOptions(o, plan);
  EXPECT_EQ(record.size(), plain.size() + 4);
  const RenderOptions back = RenderOptionsFromRecord(record);
  EXPECT_EQ(back.occluder, "4:9");
  EXPECT_EQ(back.occluder_cover, "0.125:1");
  EXPECT_EQ(back.occluder_angle_deg, 45);
  EXPECT_EQ(back.occluder_grey, 30);
  EXPECT_EQ(EffectiveOptions(back, MakePlan(back)), record);
}

TEST(RenderPlan, SmallSetHasOneClipPerHeightNamedByHeightAndRepeatWithTheAskedFrames) {
  const test::TempDir dir("render_plan_small");
  const RenderOptions o = SmallSet(dir.path() / "set");
  const RenderSetPlan set = PlanRenderSet(o);
  ASSERT_EQ(set.clips.size(), 2u);
  EXPECT_EQ(set.clips[0].clip_id, "drop_h100mm_r1");
  EXPECT_EQ(set.clips[1].clip_id, "drop_h200mm_r1");
  EXPECT_EQ(set.clips[0].file, "drop_h100mm_r1.avi");  // format auto = MJPG in .avi
  EXPECT_EQ(ClipName(0.35, 2), "drop_h350mm_r2");
  EXPECT_EQ(ClipName(0.05, 1), "drop_h050mm_r1");
  EXPECT_FALSE(fs::exists(o.out_dir));  // planning writes nothing

  const RenderTruth truth = RenderSet(set);
  ASSERT_EQ(truth.clips.size(), 2u);
  const double g = o.gravity_mps2;
  for (size_t i = 0; i < truth.clips.size(); ++i) {
    const ClipTruth& clip = truth.clips[i];
    EXPECT_EQ(clip.clip, set.clips[i].file);
    EXPECT_DOUBLE_EQ(clip.drop_height_m, o.heights_m[i]);
    EXPECT_TRUE(fs::exists(fs::path(o.out_dir) / clip.clip));
    // first_frames: only the first 5 frames are drawn, numbered 0..4 at frame / fps.
    ASSERT_EQ(clip.frames.size(), 5u);
    EXPECT_EQ(clip.frames.back().frame, 4);
    EXPECT_DOUBLE_EQ(clip.frames.back().t_s, 4 / o.fps);
    // The whole clip (the plan) reaches past the first contact: release plus the free fall
    // time t = sqrt(2 h / g) (docs/methods.md §2).
    const double fall_s = std::sqrt(2 * clip.release_drop_height_m / g);
    EXPECT_GT(set.clips[i].plan.frames / o.fps, clip.release_time_s + fall_s);
    // Release heights differ from the nominal by the jitter at most.
    EXPECT_LE(std::abs(clip.release_drop_height_m - clip.drop_height_m), o.height_jitter_m);
  }
  EXPECT_FALSE(truth.calibration.has_value());
  EXPECT_EQ(truth.options, EffectiveOptions(o, MakePlan(o)));
}

TEST(RenderPlan, FirstImpactIsTheFreeFallFromTheReleaseHeight) {
  // Free fall from rest: v = sqrt(2 g h) after t = sqrt(2 h / g) (docs/methods.md §2), with h
  // the tyre's lowest point at release (the contact starts when it reaches the floor).
  // Tolerances: the forward model's flight is closed form, so both agree to rounding here
  // (< 1e-15 measured); 1e-6 leaves room for a change of integrator without hiding a wrong
  // height or time origin (a 1 mm height error moves the speed by ~2e-3 m/s).
  constexpr double kSpeedToleranceMps = 1e-6;
  constexpr double kTimeToleranceS = 1e-6;
  const test::TempDir dir("render_plan_fall");
  RenderOptions o = SmallSet(dir.path() / "set");
  o.heights_m = {0.2};
  o.first_frames = 2;
  const RenderTruth truth = RenderSet(PlanRenderSet(o));
  const ClipTruth& clip = truth.clips.at(0);
  ASSERT_FALSE(clip.impacts.empty());
  const double g = o.gravity_mps2;
  const double h = clip.release_drop_height_m;
  EXPECT_NEAR(clip.impacts[0].impact_speed_mps, std::sqrt(2 * g * h), kSpeedToleranceMps);
  EXPECT_NEAR(clip.impacts[0].t_contact_s - clip.release_time_s, std::sqrt(2 * h / g), kTimeToleranceS);
}

TEST(RenderPlan, SameSeedTwiceGivesIdenticalTruthAndFilesWhateverTheClipOrder) {
  const test::TempDir dir("render_plan_seed");
  RenderOptions o = SmallSet(dir.path() / "a");
  const RenderTruth a = RenderSet(PlanRenderSet(o));
  o.out_dir = (dir.path() / "b").string();
  // Clips drawn last to first: the output must not depend on the order.
  const ClipLoop reverse = [](size_t count, const std::function<void(size_t)>& render_clip) {
    for (size_t i = count; i-- > 0;) render_clip(i);
  };
  const RenderTruth b = RenderSet(PlanRenderSet(o), reverse);
  ASSERT_EQ(a.clips.size(), b.clips.size());
  EXPECT_EQ(a.options, b.options);
  for (size_t i = 0; i < a.clips.size(); ++i) {
    const ClipTruth& x = a.clips[i];
    const ClipTruth& y = b.clips[i];
    EXPECT_EQ(x.clip, y.clip);
    EXPECT_EQ(x.noise_seed, y.noise_seed);
    EXPECT_EQ(x.release_drop_height_m, y.release_drop_height_m);
    EXPECT_EQ(x.release_time_s, y.release_time_s);
    EXPECT_EQ(x.start_x_m, y.start_x_m);
    EXPECT_EQ(x.start_spin_rad, y.start_spin_rad);
    ASSERT_EQ(x.impacts.size(), y.impacts.size());
    for (size_t k = 0; k < x.impacts.size(); ++k) {
      EXPECT_EQ(x.impacts[k].t_contact_s, y.impacts[k].t_contact_s);
      EXPECT_EQ(x.impacts[k].impact_speed_mps, y.impacts[k].impact_speed_mps);
      EXPECT_EQ(x.impacts[k].cor, y.impacts[k].cor);
    }
    ASSERT_EQ(x.frames.size(), y.frames.size());
    for (size_t k = 0; k < x.frames.size(); ++k) {
      EXPECT_EQ(x.frames[k].u_px, y.frames[k].u_px);
      EXPECT_EQ(x.frames[k].v_px, y.frames[k].v_px);
      EXPECT_EQ(x.frames[k].x_m, y.frames[k].x_m);
      EXPECT_EQ(x.frames[k].y_m, y.frames[k].y_m);
    }
    EXPECT_EQ(test::ReadFileBytes(dir.path() / "a" / x.clip), test::ReadFileBytes(dir.path() / "b" / y.clip));
  }
  // Another seed draws another set.
  o.out_dir = (dir.path() / "c").string();
  o.seed = 12;
  const RenderTruth c = RenderSet(PlanRenderSet(o));
  EXPECT_NE(c.clips[0].noise_seed, a.clips[0].noise_seed);
  EXPECT_NE(test::ReadFileBytes(dir.path() / "c" / c.clips[0].clip),
            test::ReadFileBytes(dir.path() / "a" / a.clips[0].clip));
}

TEST(RenderPlan, TheCalibrationSeedIsDerivedFromTheSeedUnlessGivenAndIsRecordedOnlyWhenGiven) {
  // Common practice, no source: an override that leaves earlier outputs as they were.
  RenderOptions o = SmallSet("unused");
  EXPECT_EQ(CalibrationNoiseSeed(o), 11u ^ 0xCA11B8u);  // what the images always used
  for (const auto& [name, value] : EffectiveOptions(o, MakePlan(o))) EXPECT_NE(name, "calibration_seed");
  o.calibration_seed = 42;
  EXPECT_EQ(CalibrationNoiseSeed(o), 42u);
  const RenderOptions back = RenderOptionsFromRecord(EffectiveOptions(o, MakePlan(o)));
  EXPECT_EQ(back.calibration_seed, std::optional<uint64_t>(42));
  // Different seeds draw different noise on the same scene.
  const RenderSetPlan set = PlanRenderSet(o);
  CheckerboardSpec board{5, 4, 0.04};
  const auto a = RenderCalibrationImages(*set.renderer, board, 1, set.plan.exposure, true, 1);
  const auto b = RenderCalibrationImages(*set.renderer, board, 1, set.plan.exposure, true, 2);
  const auto c = RenderCalibrationImages(*set.renderer, board, 1, set.plan.exposure, true, 1);
  EXPECT_GT(cv::norm(a[1].image, b[1].image, cv::NORM_L1), 0.0);
  EXPECT_EQ(cv::norm(a[1].image, c[1].image, cv::NORM_L1), 0.0);
}

}  // namespace
TEST(RenderPlan, TheMarkerOffsetReachesTheWheelIsRecordedOnlyWhenSetAndIsRangeChecked) {
  // Common practice, no source: an option that leaves earlier outputs as they were.
  RenderOptions o = SmallSet("unused");
  for (const auto& [name, value] : EffectiveOptions(o, MakePlan(o))) EXPECT_NE(name, "marker_offset_m");
  o.marker_offset_m = 0.03;
  EXPECT_DOUBLE_EQ(MakePlan(o).wheel.marker_offset_m, 0.03);
  EXPECT_DOUBLE_EQ(RenderOptionsFromRecord(EffectiveOptions(o, MakePlan(o))).marker_offset_m, 0.03);
  o.marker_offset_m = 0.7;
  EXPECT_NE(ValidateRenderOptions(o).value_or("").find("--marker-offset"), std::string::npos);
}

}  // namespace dropfit::synth
