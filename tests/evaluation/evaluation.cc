#include "evaluation/evaluation.h"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <map>
#include <unistd.h>

#include "sketch/landmarks/fitting.h"
#include "support/hershey.h"
#include "support/random_shapes.h"
#include "support/truetype.h"
#include "support/world_atlas.h"

namespace waymark::evaluation {

using Clock = std::chrono::steady_clock;

double percentile(std::vector<double> values, double p) {
  if (values.empty()) return 0;
  std::sort(values.begin(), values.end());
  return values[std::min(values.size() - 1, static_cast<std::size_t>(p * values.size()))];
}

const char* const kHersheyStyles[] = {"futural", "futuram", "rowmant", "timesr", "timesi", "timesib",
                                      "cursive", "scriptc", "gothgbt", "gothgrt", "gothitt"};

DataSet hershey_set(bool single_curve, std::size_t query_stride, const std::vector<std::string>& styles) {
  DataSet set;
  set.name = single_curve ? "Hershey glyphs, longest stroke" : "Hershey glyphs";
  set.source = "Debian hershey-fonts-data (Hershey fonts: free use with the acknowledgements in "
               "/usr/share/doc/hershey-fonts-data/copyright)";
  std::vector<std::string> chosen = styles;
  if (chosen.empty()) chosen.assign(std::begin(kHersheyStyles), std::end(kHersheyStyles));
  for (const std::string& style : chosen) {
    for (const testing::Glyph& glyph : testing::read_hershey_glyphs(style)) {
      Shape shape = single_curve ? testing::longest_stroke(glyph.shape) : glyph.shape;
      set.stored.push_back({style + "/" + glyph.character, std::string(1, glyph.character), std::move(shape)});
    }
  }
  set.query_stride = query_stride;
  return set;
}

struct FontFile {
  const char* path;
  const char* style;
};

const FontFile kFonts[] = {
    {"/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf", "DejaVuSans"},
    {"/usr/share/fonts/truetype/dejavu/DejaVuSans-Bold.ttf", "DejaVuSans-Bold"},
    {"/usr/share/fonts/truetype/dejavu/DejaVuSansMono.ttf", "DejaVuSansMono"},
    {"/usr/share/fonts/truetype/dejavu/DejaVuSerif.ttf", "DejaVuSerif"},
    {"/usr/share/fonts/truetype/dejavu/DejaVuSerif-Bold.ttf", "DejaVuSerif-Bold"},
    {"/usr/share/fonts/truetype/liberation/LiberationSans-Regular.ttf", "LiberationSans"},
    {"/usr/share/fonts/truetype/liberation/LiberationSerif-Regular.ttf", "LiberationSerif"},
    {"/usr/share/fonts/truetype/liberation/LiberationMono-Regular.ttf", "LiberationMono"},
    {"/usr/share/fonts/truetype/freefont/FreeSans.ttf", "FreeSans"},
    {"/usr/share/fonts/truetype/freefont/FreeSerif.ttf", "FreeSerif"},
    {"/usr/share/fonts/truetype/freefont/FreeMono.ttf", "FreeMono"},
};

DataSet truetype_set(bool single_curve, std::size_t query_stride) {
  DataSet set;
  set.name = single_curve ? "TrueType outlines, longest ring" : "TrueType outlines";
  set.source = "Debian fonts-dejavu-core (Bitstream Vera licence), fonts-liberation (GPL-2 with font exception), "
               "fonts-freefont-ttf (GPL-3+ with font exception)";
  std::size_t fonts = 0;
  for (const FontFile& font : kFonts) {
    if (!std::filesystem::exists(font.path)) continue;
    ++fonts;
    for (const testing::Glyph& glyph : testing::read_truetype_glyphs(font.path, font.style)) {
      Shape shape = single_curve ? testing::longest_ring(glyph.shape) : glyph.shape;
      set.stored.push_back({glyph.style + "/" + glyph.character, std::string(1, glyph.character), std::move(shape)});
    }
  }
  set.name += " (" + std::to_string(fonts) + " fonts)";
  set.query_stride = query_stride;
  return set;
}

namespace {

// Each ring keeps every other vertex (at least three): a coarser drawing of the same outline.
Shape thinned(const Shape& shape) {
  Shape out = shape;
  for (Path& ring : out.parts) {
    if (ring.size() < 8) continue;
    Path kept;
    for (std::size_t i = 0; i < ring.size(); i += 2) kept.push_back(ring[i]);
    ring = std::move(kept);
  }
  return out;
}

}  // namespace

DataSet country_set(bool single_curve, std::size_t query_stride) {
  DataSet set;
  set.name = single_curve ? "Countries, largest ring" : "Countries";
  set.source = "npm world-atlas 2.0.2 (Natural Earth, public domain; package under ISC)";
  set.frame = Frame::absolute;
  set.domain = Box{-190, -100, 190, 100};
  const auto coarse = testing::read_world_atlas(testing::world_atlas_file("countries-110m.json"));
  if (coarse.empty()) fail("world-atlas not found: run scripts/install-dependencies.sh --tests");
  SeededRandom random(5);
  auto pick = [&](const Shape& s) { return single_curve ? testing::longest_ring(s) : s; };
  for (const auto& country : coarse) set.stored.push_back({country.name, country.name, pick(country.outline)});
  const std::size_t stride = query_stride;
  for (std::size_t i = 0; i < coarse.size(); i += stride) {
    set.queries.push_back({"jittered " + coarse[i].name, coarse[i].name, testing::jittered(pick(coarse[i].outline), random, 0.1)});
    set.queries.push_back({"thinned " + coarse[i].name, coarse[i].name, thinned(pick(coarse[i].outline))});
  }
  if (!single_curve) {  // 50m rings start elsewhere than 110m ones: a resolution change, Hausdorff only
    const auto fine = testing::read_world_atlas(testing::world_atlas_file("countries-50m.json"));
    if (fine.empty()) fail("world-atlas's countries-50m.json not found: run scripts/install-dependencies.sh --tests");
    for (std::size_t i = 0; i < fine.size(); i += stride) {
      if (std::none_of(coarse.begin(), coarse.end(), [&](const auto& c) { return c.name == fine[i].name; })) continue;
      set.queries.push_back({"50m " + fine[i].name, fine[i].name, fine[i].outline});
    }
  }
  set.name += ": queries jittered, thinned" + std::string(single_curve ? "" : ", 50m");
  return set;
}

// --- collections -------------------------------------------------------------------------------

const char* layout_name(Layout layout) { return layout == Layout::grid ? "grid" : layout == Layout::random ? "random" : "fitted"; }

TemporaryCollection::TemporaryCollection(const DataSet& set, Layout layout, std::size_t landmarks) {
  static int serial = 0;
  directory_ = std::filesystem::temp_directory_path() /
               ("waymark-evaluation-" + std::to_string(::getpid()) + "-" + std::to_string(serial++));
  std::filesystem::remove_all(directory_);
  CollectionSettings settings;
  settings.frame = set.frame;
  if (layout == Layout::grid) {
    settings.landmarks = need(grid_landmarks(set.domain, landmarks), "grid landmarks");
  } else if (layout == Layout::random) {
    settings.landmarks = need(random_landmarks(set.domain, landmarks, 7), "random landmarks");
  } else {
    std::vector<Shape> sample;
    for (const Labelled& shape : set.stored) sample.push_back(apply_frame(shape.shape, set.frame));
    FitOptions options;
    options.count = landmarks;
    options.domain = set.domain;
    settings.landmarks = need(fit_landmarks(sample, options), "fitted landmarks");
  }
  collection_ = need(Collection::create(directory_.string(), settings), "create");
  std::vector<ShapeRecord> records;
  for (const Labelled& shape : set.stored) records.push_back({shape.id, shape.shape, "{}"});
  need(collection_->upsert(records), "upsert");
}

TemporaryCollection::~TemporaryCollection() {
  collection_.reset();
  std::error_code ignored;
  std::filesystem::remove_all(directory_, ignored);
}

std::vector<Query> queries_of(const DataSet& set) {
  std::vector<Query> queries;
  if (set.queries.empty()) {
    for (std::size_t i = 0; i < set.stored.size(); i += set.query_stride) queries.push_back({&set.stored[i], true});
  } else {
    for (const Labelled& query : set.queries) queries.push_back({&query, false});
  }
  return queries;
}

Result<QueryAnswer> ask(const Collection& collection, const Query& query, const QueryOptions& options, bool full_scan) {
  if (full_scan) {
    if (!query.stored) return collection.nearest_by_full_scan(query.shape->shape, options);
    QueryOptions more = options;
    ++more.k;  // the full scan does not exclude the stored shape itself
    Result<QueryAnswer> answer = collection.nearest_by_full_scan(query.shape->shape, more);
    if (answer) {
      std::erase_if(answer->hits, [&](const QueryHit& hit) { return hit.id == query.shape->id; });
      if (answer->hits.size() > options.k) answer->hits.resize(options.k);
    }
    return answer;
  }
  return query.stored ? collection.nearest_to_stored(query.shape->id, options) : collection.nearest(query.shape->shape, options);
}

QualityRow measure_quality(const DataSet& set, Metric metric, Layout layout, std::size_t landmarks,
                           std::vector<WorstCase>* worst) {
  TemporaryCollection collection(set, layout, landmarks);
  std::map<std::string, std::size_t> label_count;
  std::map<std::string, std::string> label_of;
  for (const Labelled& shape : set.stored) {
    ++label_count[shape.label];
    label_of[shape.id] = shape.label;
  }
  QualityRow row{set.name, metric_name(metric), layout_name(layout), landmarks, {}, 0};
  std::vector<double> times;
  for (const Query& query : queries_of(set)) {
    QueryOptions options;
    options.metric = metric;
    options.k = 10;
    const auto start = Clock::now();
    const QueryAnswer answer = need(ask(*collection, query, options), "query");
    times.push_back(milliseconds(Clock::now() - start));
    std::vector<bool> relevant;
    for (const QueryHit& hit : answer.hits) relevant.push_back(label_of[hit.id] == query.shape->label);
    row.sums.add(relevant, label_count[query.shape->label] - (query.stored ? 1 : 0));
    // The sketch ranks a wrong shape first: record it with the exact distances of both.
    if (worst && !relevant.empty() && !relevant[0]) {
      QueryOptions exact_options;
      exact_options.metric = Metric::hausdorff;
      exact_options.exact = true;
      exact_options.k = 10;
      const QueryAnswer exact = need(ask(*collection, query, exact_options), "exact query");
      if (!exact.hits.empty() && label_of[exact.hits[0].id] == query.shape->label) {
        double wrong_exact = -1;
        for (const QueryHit& hit : exact.hits) {
          if (hit.id == answer.hits[0].id) wrong_exact = hit.distance;
        }
        double right_sketch = -1;
        for (const QueryHit& hit : answer.hits) {
          if (hit.id == exact.hits[0].id) right_sketch = hit.distance;
        }
        worst->push_back({query.shape->id, answer.hits[0].id, exact.hits[0].id, answer.hits[0].distance, right_sketch,
                          wrong_exact, exact.hits[0].distance});
      }
    }
  }
  row.median_ms = percentile(times, 0.5);
  return row;
}

}  // namespace waymark::evaluation
