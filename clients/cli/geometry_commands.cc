// Local geometry commands of the `waymark` CLI: distance, landmarks, sketch. They use sketch/
// directly and need no server.
#include "clients/cli/geometry_commands.h"

#include <cstdio>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "clients/cli/arguments.h"
#include "sketch/distance/frechet.h"
#include "sketch/distance/hausdorff.h"
#include "sketch/geometry/formats.h"
#include "sketch/landmarks/fitting.h"
#include "sketch/landmarks/sketcher.h"

namespace waymark::cli {
namespace {

using Json = nlohmann::json;

int report(const Status& status) {
  std::cerr << "waymark: " << status.to_string() << "\n";
  return status.code() == StatusCode::invalid_argument || status.code() == StatusCode::not_applicable ? 2 : 1;
}

std::string number_text(double value) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}

Result<ParseOptions> parse_options(const Arguments& arguments) {
  ParseOptions options;
  Result<std::uint64_t> vertices = arguments.count("max-vertices", options.limits.max_vertices);
  if (!vertices) return vertices.status();
  Result<double> tolerance = arguments.number("curve-tolerance", options.curve_tolerance);
  if (!tolerance) return tolerance.status();
  options.limits.max_vertices = *vertices;
  options.curve_tolerance = *tolerance;
  return options;
}

// Reads, parses and frames one shape operand; `label` ("first shape") goes into errors.
Result<Shape> load_shape(const std::string& operand, const std::string& label, const Arguments& arguments) {
  Result<ParseOptions> options = parse_options(arguments);
  if (!options) return options.status();
  Result<ShapeFormat> format = parse_shape_format(arguments.value_or("format", "auto"));
  if (!format) return format.status();
  Result<Frame> frame = parse_frame(arguments.value_or("frame", "absolute"));
  if (!frame) return frame.status();
  Result<std::string> text = read_shape_argument(operand);
  if (!text) return text.status();
  Result<Shape> shape = parse_shape(*text, *format, *options);
  if (!shape) {
    return Status(shape.status().code(), label + ": " + shape.status().message(), shape.status().where());
  }
  return apply_frame(*shape, *frame);
}

Json point_json(Point p) { return Json::array({p.x, p.y}); }

const std::set<std::string> kShapeFlags = {"format", "frame", "max-vertices", "curve-tolerance"};

std::set<std::string> with_shape_flags(std::set<std::string> flags) {
  flags.insert(kShapeFlags.begin(), kShapeFlags.end());
  return flags;
}

}  // namespace

int distance_command(const std::vector<std::string>& words) {
  Result<Arguments> arguments = Arguments::parse(words, with_shape_flags({"metric"}), {"json", "region", "directed"});
  if (!arguments) return report(arguments.status());
  if (arguments->operands().size() != 2) return report(invalid_argument("distance needs two shapes: A B"));
  Result<Shape> a = load_shape(arguments->operands()[0], "first shape", *arguments);
  if (!a) return report(a.status());
  Result<Shape> b = load_shape(arguments->operands()[1], "second shape", *arguments);
  if (!b) return report(b.status());

  const std::string metric = arguments->value_or("metric", "hausdorff");
  DistanceResult result;
  if (metric == "hausdorff") {
    HausdorffOptions options;
    options.region_semantics = arguments->has("region");
    result = arguments->has("directed") ? directed_hausdorff(*a, *b, options) : hausdorff(*a, *b, options);
  } else if (metric == "frechet" || metric == "discrete-frechet") {
    if (arguments->has("region") || arguments->has("directed")) {
      return report(invalid_argument("--region and --directed apply to the hausdorff metric only"));
    }
    Result<DistanceResult> value = metric == "frechet" ? frechet(*a, *b) : discrete_frechet(*a, *b);
    if (!value) return report(value.status());
    result = *value;
  } else {
    return report(invalid_argument("unknown metric '" + metric + "' (expected hausdorff, frechet or discrete-frechet)"));
  }

  if (arguments->has("json")) {
    Json out = {{"metric", metric},
                {"distance", result.value},
                {"upper_bound", result.upper_bound},
                {"converged", result.converged},
                {"witness", {{"first", point_json(result.from)}, {"second", point_json(result.to)}}}};
    std::cout << out.dump(2) << "\n";
  } else {
    std::cout << number_text(result.value) << "\n";
    if (!result.converged) {
      std::cerr << "waymark: warning: work budget ran out; the distance lies in [" << number_text(result.value)
                << ", " << number_text(result.upper_bound) << "]\n";
    }
  }
  return 0;
}

int landmarks_command(const std::vector<std::string>& words) {
  Result<Arguments> arguments = Arguments::parse(
      words, with_shape_flags({"layout", "count", "seed", "generation", "domain", "sample", "output", "candidates", "pairs"}),
      {"region"});
  if (!arguments) return report(arguments.status());
  if (!arguments->operands().empty()) return report(invalid_argument("landmarks takes no operands, only options"));
  Result<LandmarkLayout> layout = parse_landmark_layout(arguments->value_or("layout", "grid"));
  if (!layout) return report(layout.status());
  Result<std::uint64_t> count = arguments->count("count", 64);
  Result<std::uint64_t> seed = arguments->count("seed", 1);
  Result<std::uint64_t> generation = arguments->count("generation", 1);
  for (const Status& s : {count.status(), seed.status(), generation.status()}) {
    if (!s.is_ok()) return report(s);
  }
  Box domain = unit_frame_domain();
  if (auto text = arguments->value("domain")) {
    char tail = 0;
    if (std::sscanf(text->c_str(), "%lf,%lf,%lf,%lf%c", &domain.min_x, &domain.min_y, &domain.max_x, &domain.max_y,
                    &tail) != 4) {
      return report(invalid_argument("--domain expects MIN_X,MIN_Y,MAX_X,MAX_Y, got '" + *text + "'"));
    }
  }

  Result<LandmarkSet> set = Status(StatusCode::internal, "no layout");
  if (*layout == LandmarkLayout::grid) {
    set = grid_landmarks(domain, *count);
  } else if (*layout == LandmarkLayout::random) {
    set = random_landmarks(domain, *count, *seed);
  } else {
    auto sample_path = arguments->value("sample");
    if (!sample_path) return report(invalid_argument("--layout fitted needs --sample FILE (one shape per line)"));
    std::ifstream in(*sample_path);
    if (!in) return report(Status(StatusCode::io_error, "cannot read sample file '" + *sample_path + "'"));
    std::vector<Shape> sample;
    std::string line;
    for (std::size_t number = 1; std::getline(in, line); ++number) {
      if (line.find_first_not_of(" \t\r") == std::string::npos) continue;
      Result<Shape> shape = load_shape(line, *sample_path + " line " + std::to_string(number), *arguments);
      if (!shape) return report(shape.status());
      sample.push_back(std::move(*shape));
    }
    FitOptions options;
    options.domain = domain;
    options.count = *count;
    options.seed = *seed;
    options.region_semantics = arguments->has("region");
    Result<std::uint64_t> candidates = arguments->count("candidates", options.candidate_count);
    Result<std::uint64_t> pairs = arguments->count("pairs", options.pair_count);
    if (!candidates) return report(candidates.status());
    if (!pairs) return report(pairs.status());
    options.candidate_count = *candidates;
    options.pair_count = *pairs;
    set = fit_landmarks(sample, options);
  }
  if (!set) return report(set.status());
  set->generation = *generation;
  if (auto output = arguments->value("output")) {
    if (Status s = save_landmark_file(*set, *output); !s.is_ok()) return report(s);
    std::cerr << "waymark: wrote " << set->size() << " landmarks (" << landmark_layout_name(set->layout) << ") to "
              << *output << "\n";
  } else {
    std::cout << to_landmark_file(*set);
  }
  return 0;
}

int sketch_command(const std::vector<std::string>& words) {
  Result<Arguments> arguments = Arguments::parse(words, with_shape_flags({"landmarks"}), {"region", "json"});
  if (!arguments) return report(arguments.status());
  auto landmark_path = arguments->value("landmarks");
  if (!landmark_path) return report(invalid_argument("sketch needs --landmarks FILE"));
  if (arguments->operands().size() != 1) return report(invalid_argument("sketch needs one shape"));
  Result<LandmarkSet> set = load_landmark_file(*landmark_path);
  if (!set) return report(set.status());
  Result<Shape> shape = load_shape(arguments->operands()[0], "shape", *arguments);
  if (!shape) return report(shape.status());
  const Sketcher sketcher(*set, arguments->has("region"));
  const std::vector<float> vector = sketcher.sketch(*shape);
  if (arguments->has("json")) {
    std::cout << Json{{"generation", set->generation}, {"sketch", vector}}.dump() << "\n";
  } else {
    for (std::size_t i = 0; i < vector.size(); ++i) std::cout << (i ? " " : "") << vector[i];
    std::cout << "\n";
  }
  return 0;
}

}  // namespace waymark::cli
