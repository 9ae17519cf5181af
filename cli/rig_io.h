#pragma once
// The rig file (rig.json): calib::Rig on disk. Made once per camera set-up by
// `dropfit calibrate`; read by track, analyze and run.
//
// Format: a JSON object whose field names are dropfit's own; numbers in the units their names
// carry; a non-finite number is written as null. Top-level fields:
//   schema_version      integer, must equal calib::Rig::kSchemaVersion (1)
//   tool_version        dropfit version that wrote the file
//   image_size_px       { width, height }
//   lens                null (no lens model: pixels are used as measured) or
//                       { camera_matrix_px: 3x3 rows, distortion: [k1, k2, p1, p2, k3 ...]
//                         (OpenCV's order), distortion_terms: "k1,k2,..." (fitted terms) }
//   plane               { view, plane_from_undistorted: 3x3 rows (undistorted pixel -> metres,
//                         x_m right, y_m up), rvec_rad, tvec_m (board pose in the camera,
//                         null without a lens) }
//   vertical            { up: top|bottom|left|right, image_up_at_centre: [du, dv] (unit
//                         vector, informative) }
//   floor               { y_origin: floor|board, corner_height_m: number or null }
//   board               { inner_corners: "9x6", square_m }
//   capture_fps         number or null
//   quality             calib::RigQuality's fields, same names (per view: views[] with name, rms_px)
//   inputs              [ { file, fnv1a64 } ]: every input file and its hash
//   warnings            [ text ]
//   calibrate_options   { name: value text }: the options the calibration ran with
//   uncertainty         (optional) calib::RigUncertainty's fields, same names; covariance as
//                       rows, one per name in `parameters` (docs/formats.md, "The rig file")
// Readers ignore fields they do not know, so fields can be added without a new schema version.

#include <filesystem>

#include "calib/rig.h"

namespace dropfit::cli {

// Reads and checks a rig file. Throws std::runtime_error whose message starts with the file
// name and says what is wrong: unreadable file, malformed JSON (with line and column), unknown
// schema version, a missing or mistyped field (named), a null where a number is needed, or a
// rig calib::ValidateRig refuses (non-invertible mapping, bad lens...); and what to do (correct
// the file or make it again with `dropfit calibrate`).
calib::Rig ReadRigFile(const std::filesystem::path& path);

// Parses rig JSON text; `display_name` names the source in messages. Throws as ReadRigFile.
calib::Rig ParseRigJson(const std::string& text, const std::string& display_name);

// Writes the rig atomically (cli/atomic_write.h). Throws std::invalid_argument when the rig
// fails calib::ValidateRig (nothing is written), std::runtime_error when the file cannot be written.
void WriteRigFile(const std::filesystem::path& path, const calib::Rig& rig);

// The JSON text WriteRigFile writes (2-space indented).
std::string RigToJson(const calib::Rig& rig);

}  // namespace dropfit::cli
