#include <memory>

#include "cli/render_command.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

namespace {

// Contact law, mass, heights, repeats, seed and the motion around the drop.
void AddPhysicsOptions(CLI::App* sub, RenderCommandOptions* o) {
  const char* physics = "Physics";
  sub->add_option("--law", o->law,
                  "Contact law: kelvin-voigt|hunt-crossley|hertz|bilinear|volumetric, or bottoming (a truth outside "
                  "the fitted laws: stiffening with the cube of the deflection beyond a knee)")
      ->capture_default_str()
      ->group(physics);
  sub->add_option("--param", o->params,
                  "Law parameter NAME=VALUE in the names and units of result.json, repeatable, e.g. "
                  "--param k_n_per_m=4e4 --param c_ns_per_m=100 (kelvin-voigt); k, n, alpha_s_per_m "
                  "(hunt-crossley, hertz); k1_n_per_m, k2_n_per_m, knee_m, c_ns_per_m (bilinear); "
                  "kv_n_per_m3, a_s_per_m (volumetric); k_n_per_m, k3_n_per_m3, knee_m, a_s_per_m (bottoming). Unset "
                  "ones take the law's default")
      ->group(physics);
  sub->add_option("--mass", o->mass_kg, "Dropped mass [kg], (0, 1e4]")->capture_default_str()->group(physics);
  sub->add_option("--heights", o->heights_m,
                  "Drop heights [m]: tyre's lowest point above the floor at release; one clip set per "
                  "height, comma-separated or repeated, each 0.005..5")
      ->delimiter(',')
      ->capture_default_str()
      ->group(physics);
  sub->add_option("--repeats", o->repeats, "Clips per height, 1..100")->capture_default_str()->group(physics);
  sub->add_option("--seed", o->seed, "Master seed: noise, textures and repeat-to-repeat variation")
      ->capture_default_str()
      ->group(physics);
  sub->add_option("--height-jitter", o->height_jitter_m,
                  "Repeat-to-repeat spread of the release height [m], uniform +-, [0, 0.05]; the "
                  "simulated height is in truth.json")
      ->capture_default_str()
      ->group(physics);
  sub->add_option("--drift", o->drift_mps, "Horizontal hub speed [m/s], [-1, 1]")
      ->capture_default_str()
      ->group(physics);
  sub->add_option("--spin", o->spin_radps, "Wheel rotation rate [rad/s], counter-clockwise on screen, [-100, 100]")
      ->capture_default_str()
      ->group(physics);
  sub->add_option("--gravity", o->gravity_mps2, "Local gravity [m/s^2], [9.7, 9.9]")
      ->capture_default_str()
      ->group(physics);
}

// The wheel: name, radii, tread, marker.
void AddSpecimenOptions(CLI::App* sub, RenderCommandOptions* o) {
  const char* specimen = "Specimen";
  sub->add_option("--specimen", o->specimen, "Specimen name written to manifest.csv")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--free-radius", o->free_radius_m, "Tyre free radius, hub centre to tread [m], [0.02, 1]")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--rim-radius", o->rim_radius_m,
                  "Rim radius [m] (drawing only); 0 = free radius - 2 x section radius, or 0.55 x free radius")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--tread-width", o->tread_width_m,
                  "Tread width [m] (volumetric law, cylinder geometry; written to the manifest); 0 = none")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--section-radius", o->section_radius_m,
                  "Tyre cross-section radius [m] (volumetric law, torus geometry; wins over the tread width); "
                  "0 = none")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--marker", o->marker,
                  "Hub marker: quadrant (alternating black/white quarters, turning "
                  "with the wheel) or dot (white dot on a black cap)")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--marker-size", o->marker_diameter_m,
                  "Marker diameter [m]; 0 = 0.030 for a quadrant, 0.018 for a dot")
      ->capture_default_str()
      ->group(specimen);
}

// Image size, lens, mounting.
void AddCameraOptions(CLI::App* sub, RenderCommandOptions* o) {
  const char* camera = "Camera";
  sub->add_option("--image-size", o->image_size, "Image WIDTHxHEIGHT [px]")->capture_default_str()->group(camera);
  sub->add_option("--focal", o->focal_px,
                  "Focal length [px]; with --camera-distance it sets the scale "
                  "(px per m in the drop plane = focal / distance)")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--camera-distance", o->camera_distance_m, "Camera to drop plane along the axis [m], [0.1, 100]")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--cx", o->cx_px, "Principal point u [px]; default image centre + 3.2 px")->group(camera);
  sub->add_option("--cy", o->cy_px, "Principal point v [px]; default image centre - 2.1 px")->group(camera);
  sub->add_option("--k1", o->k1, "Radial distortion k1 (OpenCV model)")->capture_default_str()->group(camera);
  sub->add_option("--k2", o->k2, "Radial distortion k2")->capture_default_str()->group(camera);
  sub->add_option("--p1", o->p1, "Tangential distortion p1")->capture_default_str()->group(camera);
  sub->add_option("--p2", o->p2, "Tangential distortion p2")->capture_default_str()->group(camera);
  sub->add_option("--k3", o->k3, "Radial distortion k3")->capture_default_str()->group(camera);
  sub->add_option("--pitch", o->pitch_deg, "Camera pitch [deg], positive looks down, [-20, 20]")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--roll", o->roll_deg, "Camera roll [deg], [-20, 20]")->capture_default_str()->group(camera);
  sub->add_option("--yaw", o->yaw_deg, "Camera yaw [deg], positive looks right, [-20, 20]")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--floor-margin", o->floor_margin_px, "Floor line height above the image bottom [px]")
      ->capture_default_str()
      ->group(camera);
}

// Capture rate, exposure, noise, blur, flicker.
void AddSensorOptions(CLI::App* sub, RenderCommandOptions* o) {
  const char* sensor = "Sensor";
  sub->add_option("--fps", o->fps, "Capture rate [frames/s], (0, 1e6]")->capture_default_str()->group(sensor);
  sub->add_option("--exposure", o->exposure_s, "Exposure time [s], (0, 1/fps]")->capture_default_str()->group(sensor);
  sub->add_option("--subframes", o->subframes, "Renderings averaged per frame over the exposure (motion blur), 1..64")
      ->capture_default_str()
      ->group(sensor);
  sub->add_option("--read-noise", o->read_noise_grey, "Read noise s.d. [grey levels], [0, 50]")
      ->capture_default_str()
      ->group(sensor);
  sub->add_option("--electrons-per-grey", o->electrons_per_grey,
                  "Sensor gain for shot noise [electrons per grey level]; 0 = no shot noise")
      ->capture_default_str()
      ->group(sensor);
  sub->add_option("--vignetting", o->vignetting, "Brightness lost at the image corners (fraction), [0, 0.9]")
      ->capture_default_str()
      ->group(sensor);
  sub->add_option("--flicker", o->flicker, "Lighting flicker amplitude at 100 Hz (fraction), [0, 0.5]")
      ->capture_default_str()
      ->group(sensor);
  sub->add_option("--lens-blur", o->psf_sigma_px, "Gaussian lens blur s.d. [px], [0, 5]")
      ->capture_default_str()
      ->group(sensor);
  sub->add_flag("--clean", o->clean,
                "No noise, no motion or lens blur, no flicker or vignetting, lossless frames (PNG unless "
                "--format says otherwise)")
      ->group(sensor);
}

// Clip format and length, calibration images, threads.
void AddOutputOptions(CLI::App* sub, RenderCommandOptions* o) {
  const char* output = "Output";
  sub->add_option("--format", o->format,
                  "Clip format: mjpg (JPEG frames in .avi, our own writer), ffv1 (lossless .mov), h264 "
                  "(.mp4; smooths noise, demo only), png (folder of frame_NNNNN.png), auto (mjpg; png "
                  "with --clean)")
      ->capture_default_str()
      ->group(output);
  sub->add_option("--jpeg-quality", o->jpeg_quality, "MJPG quality, 1..100")->capture_default_str()->group(output);
  sub->add_option("--container-fps", o->container_fps,
                  "Frame rate stored in the container (playback) [frames/s]; 0 = the capture rate. The "
                  "manifest's capture_fps always holds the capture rate")
      ->capture_default_str()
      ->group(output);
  sub->add_option("--duration", o->duration_s, "Clip length [s]; 0 = through three complete bounces (<= 3 s)")
      ->capture_default_str()
      ->group(output);
  sub->add_option("--pre-release", o->pre_release_s,
                  "Clip start before release [s], [0, 1] (when the hub is out of view at release, the clip "
                  "starts when the marker comes into view)")
      ->capture_default_str()
      ->group(output);
  sub->add_flag("!--no-calibration", o->calibration, "Do not write the checkerboard images in calib/")->group(output);
  sub->add_option("--board", o->board, "Checkerboard inner corners COLUMNSxROWS")->capture_default_str()->group(output);
  sub->add_option("--square", o->square_m, "Checkerboard square [m], 0.002..0.3")->capture_default_str()->group(output);
  sub->add_option("--lens-views", o->lens_views, "Tilted checkerboard views for the lens model, 1..12")
      ->capture_default_str()
      ->group(output);
  sub->add_option("--calibration-seed", o->calibration_seed,
                  "Noise seed of the checkerboard images alone (the scene stays that of --seed), so that repeated "
                  "rigs can be rendered; default derived from --seed")
      ->group(output);
  sub->add_option("--threads", o->threads, "Clips rendered at once, 1..64 (the output does not depend on it)")
      ->capture_default_str()
      ->group(output);
  sub->add_option("--first-frames", o->first_frames,
                  "Render only the first N frames of each clip (quick checks); 0 = all. truth.json keeps "
                  "the impacts of the full clip")
      ->capture_default_str()
      ->group(output);
}

// A card crossing the marker (known-answer partly hidden frames).
void AddOccluderOptions(CLI::App* sub, RenderCommandOptions* o) {
  const char* occluder = "Occluder";
  sub->add_option("--occluder", o->occluder,
                  "Draw a dark card in front of the wheel on frames FIRST:LAST of each clip (e.g. 120:128), "
                  "its straight edge sweeping across the hub marker; truth.json gives the fraction of the "
                  "marker covered per frame")
      ->group(occluder);
  sub->add_option("--occluder-cover", o->occluder_cover,
                  "FROM:TO fraction of the marker's extent covered at FIRST and at LAST, linear in between, "
                  "each [0, 1] (0: the edge touches the marker, 1: the marker is hidden)")
      ->capture_default_str()
      ->group(occluder);
  sub->add_option("--occluder-angle", o->occluder_angle_deg,
                  "Direction the card's edge moves in the image [deg]: 0 rightwards (the card comes from the "
                  "left), 90 downwards")
      ->capture_default_str()
      ->group(occluder);
  sub->add_option("--occluder-grey", o->occluder_grey,
                  "Card brightness [grey levels], [0, 300] (255 and above: a glint that saturates)")
      ->capture_default_str()
      ->group(occluder);
}

// The marker's plane (issue 15), in its own block.
void AddMarkerPlaneOptions(CLI::App* sub, RenderCommandOptions* o) {
  sub->add_option("--marker-offset", o->marker_offset_m,
                  "Draw the wheel (its hub face with the marker) in a plane this far in front of (> 0, toward "
                  "the camera) or behind the drop plane [m], [-0.5, 0.5]; the calibration boards stay in the "
                  "drop plane, truth.json keeps the hub's heights above the floor")
      ->capture_default_str()
      ->group("Specimen");
}

}  // namespace

void AddRenderCommand(CLI::App& app, CommandAction& action) {
  auto o = std::make_shared<RenderCommandOptions>();
  CLI::App* sub = app.add_subcommand(
      "render",
      "Synthetic drop clips with exact truth (clips, manifest.csv, truth.json, rig_exact.json) and "
      "checkerboard calibration images, from the forward model of a wheel dropped onto a rigid floor");
  sub->add_option("-o,--output", o->out_dir, "Output folder (created; files of the same names are replaced)")
      ->required();
  AddPhysicsOptions(sub, o.get());
  AddSpecimenOptions(sub, o.get());
  AddCameraOptions(sub, o.get());
  AddSensorOptions(sub, o.get());
  AddOutputOptions(sub, o.get());
  AddOccluderOptions(sub, o.get());
  AddMarkerPlaneOptions(sub, o.get());

  sub->footer(
      "Writes: the clips, manifest.csv, truth.json (per frame the drawn marker centre in pixels at\n"
      "mid-exposure and the hub in metres; per impact its figures), rig_exact.json (the\n"
      "perfect calibration), calib/lens_NN.png and calib/plane.png, render_options.txt.\n\n"
      "Example (reference conditions: 800x640 grey, ~1 px/mm, 2,000 frames/s, 0.2 ms exposure, 4\n"
      "sub-frames, read noise 2 + shot noise, 30 mm quadrant marker, JPEG q90 in MJPG .avi):\n"
      "  dropfit render -o /tmp/clips --heights 0.2,0.3 --repeats 2 --seed 7\n"
      "  dropfit calibrate /tmp/clips/calib --board 9x6 --square 0.05 --plane /tmp/clips/calib/plane.png \\\n"
      "      --corner-height 0.1 -o /tmp/clips/rig.json\n"
      "  dropfit run /tmp/clips --rig /tmp/clips/rig.json -o /tmp/clips_out\n"
      "Other laws: --law hunt-crossley --param k=2.5e5 --param n=1.5 --param alpha_s_per_m=0.2");
  sub->callback([o, &action] { action = [o] { return RunRender(*o); }; });
}

}  // namespace dropfit::cli
