#include "cli/run_plan.h"
#include "cli/subcommands.h"

namespace dropfit::cli {

void AddPlanCommand(CLI::App& app, CommandAction& action) {
  auto o = std::make_shared<PlanCommandOptions>();
  plan::PlanOptions* p = &o->plan;
  CLI::App* sub = app.add_subcommand(
      "plan",
      "Plan a test by simulation: for each frame rate the camera offers (and each scale), the frames per contact, "
      "marker blur, whether the drop and rebound fit in the image, and the expected standard uncertainty of COR, "
      "contact duration, deflection, stiffness and damping per height, for one clip and for the repeats; then the "
      "cheapest setting meeting the targets. SI units. Writes plan.json and plan.html.\n"
      "Example: dropfit plan --mass 10 --free-radius 0.25 --static-force 500 --static-deflection 0.004 "
      "--heights 0.1,0.3 -o plan_out");
  const char* specimen = "Specimen";
  sub->add_option("--mass", p->mass_kg, "Dropped mass [kg], (0, 1e4]")->capture_default_str()->group(specimen);
  sub->add_option("--free-radius", p->free_radius_m, "Free radius, hub to tread [m], [0.02, 1]")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--static-force", p->static_force_n,
                  "Rough stiffness as one static point: this force [N] ... (read as Hertz, n = 1.5)")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--static-deflection", p->static_deflection_m, "... at this deflection [m], (0, 0.5]")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--law", p->law,
                  "Or a law: kelvin-voigt|hunt-crossley|hertz|bilinear, with --param (damping may be left out: set "
                  "by --cor)")
      ->group(specimen);
  sub->add_option("--param", p->params, "Law parameter NAME=VALUE (contract names and units), repeatable")
      ->group(specimen);
  sub->add_option("--cor", p->expected_cor, "Expected coefficient of restitution, (0, 1)")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--cor-speed", p->cor_speed_mps, "... at this impact speed [m/s], (0, 20]")
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--heights", p->heights_m, "Drop heights [m], tread above the floor at release, each (0, 5]")
      ->delimiter(',')
      ->capture_default_str()
      ->group(specimen);
  sub->add_option("--impact-speeds", p->impact_speeds_mps,
                  "Or the impact speeds of interest [m/s], each (0, 10]: heights v^2 / (2 g)")
      ->delimiter(',')
      ->group(specimen);
  const char* camera = "Camera";
  sub->add_option("--sensor-width", p->sensor_width_px, "Sensor width [px]")->capture_default_str()->group(camera);
  sub->add_option("--sensor-height", p->sensor_height_px, "Sensor height [px]")->capture_default_str()->group(camera);
  sub->add_option("--rates", p->rates,
                  "Frame rates offered with the largest image at each, FPS:WIDTHxHEIGHT, or FPS (full sensor); "
                  "comma-separated")
      ->delimiter(',')
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--scale", p->scales_m_per_px,
                  "Image scale in the drop plane [m/px], one or more (comma-separated); default from --fov-width")
      ->delimiter(',')
      ->group(camera);
  sub->add_option("--fov-width", p->fov_width_m, "Scene width the full sensor width sees at the drop plane [m]")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--exposure", p->shortest_exposure_s, "Shortest exposure [s] (used, at most 1/fps)")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--marker", p->marker, "Hub marker: quadrant or dot")->capture_default_str()->group(camera);
  sub->add_option("--marker-size", p->marker_diameter_m, "Marker diameter [m], [0.004, 0.2]")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--read-noise", p->read_noise_grey, "Image noise s.d. [grey levels], [0, 50]")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--contrast", p->contrast_grey, "Marker white minus black [grey levels], [5, 255]")
      ->capture_default_str()
      ->group(camera);
  sub->add_option("--floor-margin", p->floor_margin_px, "Floor line above the image bottom [px]")
      ->capture_default_str()
      ->group(camera);
  const char* targets = "Targets (standard uncertainty of a height's mean over the repeats)";
  sub->add_option("--target-cor", p->target_cor, "COR, absolute")->capture_default_str()->group(targets);
  sub->add_option("--target-duration", p->target_duration, "Contact duration, fraction of the value")
      ->capture_default_str()
      ->group(targets);
  sub->add_option("--target-deflection", p->target_deflection, "Maximum deflection, fraction of the value")
      ->capture_default_str()
      ->group(targets);
  sub->add_option("--target-stiffness", p->target_stiffness, "Stiffness parameter, fraction of the value")
      ->capture_default_str()
      ->group(targets);
  sub->add_option("--max-repeats", p->max_repeats, "Repeats per height proposed at most, [1, 100]")
      ->capture_default_str()
      ->group(targets);
  const char* run = "Simulation and output";
  sub->add_option("--realisations", p->realisations, "Simulated clips per setting and height, [4, 1000]")
      ->capture_default_str()
      ->group(run);
  sub->add_option("--threads", p->threads, "Threads, [1, 64]")->capture_default_str()->group(run);
  sub->add_option("--seed", p->seed, "Seed of the simulated noise")->capture_default_str()->group(run);
  sub->add_option("--gravity", p->gravity_mps2, "Local gravity [m/s^2], [9.7, 9.9]")->capture_default_str()->group(run);
  sub->add_option("--render", o->render,
                  "Render N clips per height at the chosen setting and analyse them as `dropfit run` does, as a "
                  "check of the prediction (slow: seconds per clip)")
      ->capture_default_str()
      ->group(run);
  sub->add_option("-o,--out", o->out_dir, "Output folder for plan.json and plan.html")
      ->capture_default_str()
      ->group(run);
  sub->callback([o, &action] { action = [o] { return RunPlan(*o); }; });
}

}  // namespace dropfit::cli
