#pragma once
// truth.json: what `dropfit render` drew (synth/render_truth.h), for known-answer tests and
// benchmarks.
//
// Format: one JSON object, field names dropfit's own, numbers in the units their names carry,
// NaN written as null. Top level:
//   tool_version, seed, specimen, law, params { <contract name>: value }, mass_kg,
//   gravity_mps2, tread { shape, free_radius_m, tread_width_m, section_radius_m },
//   camera { image_width_px, image_height_px, fx_px, fy_px, cx_px, cy_px,
//            distortion { k1, k2, p1, p2, k3 }, rvec_rad [3], tvec_m [3] (camera_from_world,
//            OpenCV's pose: world x_m right, y_m up, z_m towards the camera, floor y_m = 0,
//            drop plane z_m = 0), centre_in_world_m [3], metres_per_px_centre },
//   wheel { free_radius_m, rim_radius_m, marker, marker_diameter_m, cap_radius_m },
//   exposure { exposure_s, subframes, read_noise_grey, electrons_per_grey,
//              vignetting_fraction, flicker_fraction, flicker_hz, flicker_phase_rad, psf_sigma_px },
//   calibration: null or { board "9x6", square_m, corner_height_m,
//                          views [ { file, drop_plane, board_rvec_rad, board_tvec_m,
//                                    inner_corners_px [[u, v], ...] (row by row) } ] },
//   clips [ { clip, clip_id, drop_height_m (nominal), release_drop_height_m (as simulated),
//             release_time_s (clip clock), capture_fps, container_fps, frame_count, noise_seed,
//             onset_height_m, start_x_m, start_spin_rad, drift_mps, spin_radps,
//             impacts [ { t_contact_s, t_separation_s, impact_speed_mps, rebound_speed_mps, cor,
//                         contact_duration_s, max_deflection_m, peak_force_n, onset_height_m,
//                         complete, separation_speed_mps, separation_deflection_m, t_lowest_s,
//                         t_peak_force_s, t_level_s, pressed_at_end } ],
//             frames { frame [], t_s [], u_px [], v_px [], x_m [], y_m [], spin_rad [],
//                      vy_mps [], contact_force_n [], in_contact [], marker_in_view [],
//                      marker_covered_fraction [] (0 without an occluder card; optional on reading) } } ],
//   options { <option>: value text }: the effective options of the run.
// Per-frame values are columns (arrays of equal length): frame i's drawn marker centre is
// (u_px[i], v_px[i]) at mid-exposure time t_s[i] = frame / capture_fps; positions are rounded
// to 1e-9 px and 1e-12 m. Times are on the clip clock of the contract (frame 0 at t = 0).

#include <filesystem>
#include <string>

#include "synth/render_truth.h"

namespace dropfit::cli {

// The truth itself is plain data (synth/render_truth.h); this file is its JSON form.
using synth::CalibrationTruth;
using synth::CalibrationViewTruth;
using synth::ClipTruth;
using synth::RenderTruth;

// The JSON text (2-space indented).
std::string TruthToJson(const RenderTruth& truth);
// Writes it atomically (cli/atomic_write.h). Throws std::runtime_error naming the path.
void WriteTruthFile(const std::filesystem::path& path, const RenderTruth& truth);
// Reads a truth file. Throws std::runtime_error starting with the file name and naming the
// missing or mistyped field.
RenderTruth ReadTruthFile(const std::filesystem::path& path);
RenderTruth ParseTruthJson(const std::string& text, const std::string& display_name);

}  // namespace dropfit::cli
