// Tests of the rig file reader and writer (cli/rig_io.h): a written rig reads back to the same
// mapping, and every broken file is refused with a message naming the file and the fault.
#include "cli/rig_io.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <string>

#include "calib/rig_uncertainty.h"
#include "tests/support/temp_dir.h"

namespace dropfit::cli {
namespace {

namespace fs = std::filesystem;

// The JSON writer prints doubles with 17 significant digits, so a round trip is exact.
constexpr double kExactTol = 0.0;

calib::Rig MakeRig() {
  calib::Rig rig;
  rig.image_size = {1024, 768};
  calib::LensModel lens;
  lens.camera_matrix = cv::Matx33d(1100.25, 0, 515.3, 0, 1101.5, 381.7, 0, 0, 1);
  lens.distortion = {-0.12, 0.08, 0.0005, -0.0003, 0.001};
  rig.lens = lens;
  rig.plane_from_undistorted = cv::Matx33d(7.1e-4, 1e-6, -0.3, 2e-6, -7.2e-4, 0.25, 1e-7, 2e-7, 1.0);
  rig.plane_rvec_rad = cv::Vec3d(0.01, -0.02, 3.1);
  rig.plane_tvec_m = cv::Vec3d(-0.1, 0.05, 0.8);
  rig.up = calib::UpSide::kLeft;
  rig.y_origin = calib::YOrigin::kFloor;
  rig.corner_height_m = 0.1;
  rig.capture_fps = 2000;
  rig.tool_version = "0.1.0";
  rig.board = {8, 5, 0.03};
  rig.plane_view = "plane.png";
  rig.quality.rms_reprojection_px = 0.041;
  rig.quality.view_names = {"a.png", "b.png"};
  rig.quality.view_rms_px = {0.04, 0.042};
  rig.quality.dropped_views = {"c.png: no board found"};
  rig.quality.square_error_mean_mm = 0.01;
  rig.quality.distortion_terms = "k1,k2,p1,p2,k3";
  rig.input_hashes = {{"a.png", "0123456789abcdef"}};
  rig.warnings = {"a warning"};
  rig.settings = {{"board", "8x5"}, {"square", "0.03"}};
  return rig;
}

std::string ErrorOf(const std::string& text) {
  try {
    ParseRigJson(text, "rig.json");
  } catch (const std::runtime_error& e) {
    return e.what();
  }
  return "(no error)";
}

TEST(RigIo, AWrittenRigReadsBackWithTheSameMappingAndFields) {
  const test::TempDir tmp("rig_io_test");
  const fs::path& dir = tmp.path();
  const calib::Rig rig = MakeRig();
  WriteRigFile(dir / "rig.json", rig);
  const calib::Rig back = ReadRigFile(dir / "rig.json");
  for (int i = 0; i < 9; ++i) {
    EXPECT_NEAR(back.plane_from_undistorted.val[i], rig.plane_from_undistorted.val[i], kExactTol);
    EXPECT_NEAR(back.lens->camera_matrix.val[i], rig.lens->camera_matrix.val[i], kExactTol);
  }
  EXPECT_EQ(back.lens->distortion, rig.lens->distortion);
  EXPECT_EQ(back.image_size, rig.image_size);
  EXPECT_EQ(back.up, calib::UpSide::kLeft);
  EXPECT_EQ(back.y_origin, calib::YOrigin::kFloor);
  EXPECT_EQ(back.corner_height_m, 0.1);
  EXPECT_EQ(back.capture_fps, 2000.0);
  EXPECT_EQ(*back.plane_tvec_m, *rig.plane_tvec_m);
  EXPECT_EQ(back.board.columns, 8);
  EXPECT_EQ(back.board.rows, 5);
  EXPECT_EQ(back.board.square_m, 0.03);
  EXPECT_EQ(back.plane_view, "plane.png");
  EXPECT_EQ(back.quality.view_names, rig.quality.view_names);
  EXPECT_EQ(back.quality.view_rms_px, rig.quality.view_rms_px);
  EXPECT_EQ(back.quality.dropped_views, rig.quality.dropped_views);
  EXPECT_EQ(back.quality.distortion_terms, "k1,k2,p1,p2,k3");
  EXPECT_EQ(back.input_hashes, rig.input_hashes);
  EXPECT_EQ(back.warnings, rig.warnings);
  EXPECT_EQ(back.settings, rig.settings);
  // The mapping itself: same plane point for the same pixel.
  const cv::Point2d a = calib::PlaneFromImage(rig, {100, 700}), b = calib::PlaneFromImage(back, {100, 700});
  EXPECT_EQ(a, b);
}

TEST(RigIo, TheUncertaintyRoundTripsAndARigWithoutOneStillReads) {
  calib::Rig rig = MakeRig();
  const calib::Rig older = ParseRigJson(RigToJson(rig), "rig.json");  // MakeRig's rig has no uncertainty
  EXPECT_FALSE(older.uncertainty);
  calib::RigUncertainty u;
  u.plane_corner_sd_px = 0.05;
  u.lens_corner_sd_px = 0.04;
  u.corner_height_sd_m = 5e-4;
  u.height_sd_at_corner_row_m = 1e-5;
  u.height_sd_100mm_m = 2e-5;
  u.height_sd_300mm_m = 3e-5;
  u.floor_sd_m = 5.1e-4;
  u.scale_rel_sd_centre = 1e-4;
  u.parameters = calib::MappingParameterNames(rig);
  const size_t n = u.parameters.size();
  ASSERT_EQ(n, 17u);  // 8 of the homography, fx fy cx cy, 5 distortion terms
  u.covariance.assign(n * n, 0.0);
  for (size_t i = 0; i < n; ++i) u.covariance[i * n + i] = 1e-12 * static_cast<double>(i + 1);
  u.covariance[1] = u.covariance[n] = 3e-13;
  rig.uncertainty = u;
  const calib::Rig back = ParseRigJson(RigToJson(rig), "rig.json");
  ASSERT_TRUE(back.uncertainty);
  EXPECT_EQ(back.uncertainty->parameters, u.parameters);
  EXPECT_EQ(back.uncertainty->covariance, u.covariance);
  EXPECT_EQ(back.uncertainty->floor_sd_m, u.floor_sd_m);
  EXPECT_EQ(back.uncertainty->height_sd_100mm_m, u.height_sd_100mm_m);
  EXPECT_EQ(back.uncertainty->scale_rel_sd_centre, u.scale_rel_sd_centre);
  EXPECT_EQ(calib::HeightSdAt(back, {0.1, 0.2}), calib::HeightSdAt(rig, {0.1, 0.2}));
  // A covariance of the wrong shape is refused, naming the field.
  std::string text = RigToJson(rig);
  const size_t at = text.find("\"covariance\": [");
  ASSERT_NE(at, std::string::npos);
  text.insert(at + std::string("\"covariance\": [").size(), "[1],");
  EXPECT_NE(ErrorOf(text).find("uncertainty.covariance"), std::string::npos) << ErrorOf(text);
}

TEST(RigIo, ARigWithoutLensOrFloorRoundTrips) {
  calib::Rig rig = MakeRig();
  rig.lens.reset();
  rig.plane_rvec_rad.reset();
  rig.plane_tvec_m.reset();
  rig.y_origin = calib::YOrigin::kBoard;
  rig.corner_height_m.reset();
  rig.capture_fps.reset();
  const calib::Rig back = ParseRigJson(RigToJson(rig), "rig.json");
  EXPECT_FALSE(back.lens);
  EXPECT_FALSE(back.plane_rvec_rad);
  EXPECT_FALSE(back.corner_height_m);
  EXPECT_FALSE(back.capture_fps);
  EXPECT_EQ(back.y_origin, calib::YOrigin::kBoard);
}

TEST(RigIo, MalformedJsonIsRefusedWithLineAndColumn) {
  // A missing comma at the end of line 2: the parser stops on line 3 at the next key.
  EXPECT_EQ(ErrorOf("{\n  \"schema_version\": 1\n  \"lens\": null\n}"),
            "rig.json: malformed JSON: parse error at line 3, column 8: syntax error while parsing object - "
            "unexpected string literal; expected '}'");
}

TEST(RigIo, AnUnknownSchemaVersionIsRefused) {
  std::string text = RigToJson(MakeRig());
  text.replace(text.find("\"schema_version\": 1"), 19, "\"schema_version\": 7");
  EXPECT_EQ(ErrorOf(text),
            "rig.json: unknown rig schema version 7 (this dropfit reads version 1); remake the rig with this "
            "dropfit's `calibrate`");
}

TEST(RigIo, ANullNumberIsRefusedNamingTheField) {
  calib::Rig rig = MakeRig();
  std::string text = RigToJson(rig);
  // A NaN is written as null; reading it back must refuse the file.
  const auto at = text.find("1100.25");
  ASSERT_NE(at, std::string::npos);
  text.replace(at, 7, "null");
  EXPECT_EQ(ErrorOf(text),
            "rig.json: field 'lens.camera_matrix_px[0][0]' is null; a number is needed (the file may hold NaN)");
}

TEST(RigIo, ANonInvertibleMappingIsRefused) {
  calib::Rig rig = MakeRig();
  std::string text = RigToJson(rig);
  const auto at = text.find("\"plane_from_undistorted\"");
  const auto end = text.find("\"rvec_rad\"", at);
  text.replace(at, end - at, "\"plane_from_undistorted\": [[0, 0, 0], [0, 0, 0], [0, 0, 0]],\n    ");
  EXPECT_EQ(ErrorOf(text), "rig.json: the plane mapping is not invertible (determinant 0)");
}

TEST(RigIo, AMissingFieldIsNamed) {
  EXPECT_EQ(ErrorOf("{\"schema_version\": 1}"), "rig.json: field 'image_size_px' is missing");
  EXPECT_EQ(ErrorOf("[1, 2]"), "rig.json: the rig file is not a JSON object");
}

TEST(RigIo, AnUnknownUpSideIsRefusedWithTheValidOnes) {
  std::string text = RigToJson(MakeRig());
  text.replace(text.find("\"up\": \"left\""), 12, "\"up\": \"sky\"");
  EXPECT_EQ(ErrorOf(text), "rig.json: field 'vertical.up': unknown up side 'sky'; valid: top, bottom, left, right");
}

// Regression (found by tests/fuzz/rig_fuzz): a number beyond a double's range (largest finite
// double about 1.8e308, IEEE 754-2008) makes nlohmann/json throw out_of_range (406), not
// parse_error; it escaped the reader without the file's name.
TEST(RigIo, ANumberBeyondADoublesRangeIsRefusedNamingTheFile) {
  std::string text = RigToJson(MakeRig());
  text.replace(text.find("1100.25"), 7, "1e400");
  EXPECT_EQ(ErrorOf(text), "rig.json: malformed JSON: number overflow parsing '1e400'");
}

// Regression (found while writing tests/fuzz): the image size was cast from double to int unchecked;
// for a value an int cannot hold that is undefined behaviour (ISO/IEC 14882:2020 [conv.fpint]/1).
TEST(RigIo, AnImageSizeThatIsNotAWholeNumberOfPixelsIsRefused) {
  const std::string text = RigToJson(MakeRig());
  for (const char* width : {"1e10", "-3e9", "1024.5"}) {
    std::string bad = text;
    bad.replace(bad.find("\"width\": 1024"), std::string("\"width\": 1024").size(), std::string("\"width\": ") + width);
    EXPECT_NE(ErrorOf(bad).find("rig.json: field 'image_size_px.width' is "), std::string::npos) << width;
    EXPECT_NE(ErrorOf(bad).find("; a whole number of pixels is needed"), std::string::npos) << width;
  }
}

// Regression (found while writing tests/fuzz): the version was read with get<int>(), which wraps
// 4294967297 (2^32 + 1) to 1 (ISO/IEC 14882:2020 [conv.integral]/3), so the file passed as version 1.
TEST(RigIo, ASchemaVersionBeyondIntIsNotTakenForVersionOne) {
  std::string text = RigToJson(MakeRig());
  text.replace(text.find("\"schema_version\": 1"), 19, "\"schema_version\": 4294967297");
  EXPECT_EQ(ErrorOf(text),
            "rig.json: unknown rig schema version 4294967297 (this dropfit reads version 1); remake the rig with this "
            "dropfit's `calibrate`");
}

// Regression (found while writing tests/fuzz): nlohmann/json's dump() recurses, and the reader dumps
// non-text calibrate_options values, so a deeply nested value (a million '[') overflowed the stack.
// The limit is 32 levels, the top-level object included (a rig file uses 4).
TEST(RigIo, JsonNestedDeeperThanARigFileIsRefused) {
  const std::string text = RigToJson(MakeRig());
  const auto close = text.rfind('}');
  const auto with = [&](const std::string& field) {
    std::string t = text;
    t.insert(close, ",\n  " + field + "\n");
    return t;
  };
  const std::string refused = "rig.json: malformed JSON: nested deeper than 32 levels";
  EXPECT_EQ(
      ErrorOf(with("\"calibrate_options\": {\"x\": " + std::string(1000000, '[') + std::string(1000000, ']') + "}")),
      refused);
  EXPECT_EQ(ErrorOf(with("\"future\": " + std::string(32, '[') + std::string(32, ']'))), refused);
  EXPECT_EQ(ErrorOf(with("\"future\": " + std::string(31, '[') + std::string(31, ']'))), "(no error)");
}

TEST(RigIo, AMissingFileIsNamed) {
  const test::TempDir tmp("rig_io_test");
  const fs::path& dir = tmp.path();
  try {
    ReadRigFile(dir / "none.json");
    FAIL() << "no exception";
  } catch (const std::runtime_error& e) {
    EXPECT_EQ(
        std::string(e.what()),
        (dir / "none.json").string() + ": cannot open the rig file (no such file); make one with `dropfit calibrate`");
  }
}

TEST(RigIo, AnInvalidRigIsNotWritten) {
  const test::TempDir tmp("rig_io_test");
  const fs::path& dir = tmp.path();
  calib::Rig rig = MakeRig();
  rig.plane_from_undistorted = cv::Matx33d::zeros();
  EXPECT_THROW(WriteRigFile(dir / "rig.json", rig), std::invalid_argument);
  EXPECT_FALSE(fs::exists(dir / "rig.json"));
}

}  // namespace
}  // namespace dropfit::cli
