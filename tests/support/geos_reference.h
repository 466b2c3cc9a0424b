// GEOS (libgeos-dev, C API) as the outside reference for distances. Shapes reach GEOS as WKT
// text read by GEOS's own reader, so no conversion code of ours sits between the two.
//
// What GEOS 3.11 computes (per its documentation):
//   GEOSHausdorffDistance: the larger of the two vertex-to-geometry distances — exact for point
//     sets, a lower bound on the continuous Hausdorff distance otherwise.
//   GEOSHausdorffDistanceDensify(f): the same after splitting every segment into pieces of at
//     most f × its length — tends to the continuous value from below.
//   GEOSFrechetDistance: the discrete Fréchet distance over the vertices.
//   GEOSFrechetDistanceDensify(f): discrete Fréchet of the densified curves — tends to the
//     continuous value from above.
#pragma once

#include <geos_c.h>

#include <stdexcept>
#include <string>

#include "sketch/geometry/formats.h"

namespace waymark::testing {

class Geos {
 public:
  Geos() : context_(GEOS_init_r()), reader_(GEOSWKTReader_create_r(context_)) {}
  ~Geos() {
    GEOSWKTReader_destroy_r(context_, reader_);
    GEOS_finish_r(context_);
  }
  Geos(const Geos&) = delete;
  Geos& operator=(const Geos&) = delete;

  double hausdorff(const Shape& a, const Shape& b, double densify_fraction = 0) {
    return binary(a, b, [&](GEOSGeometry* ga, GEOSGeometry* gb, double* out) {
      return densify_fraction > 0 ? GEOSHausdorffDistanceDensify_r(context_, ga, gb, densify_fraction, out)
                                  : GEOSHausdorffDistance_r(context_, ga, gb, out);
    });
  }

  double discrete_frechet(const Shape& a, const Shape& b, double densify_fraction = 0) {
    return binary(a, b, [&](GEOSGeometry* ga, GEOSGeometry* gb, double* out) {
      return densify_fraction > 0 ? GEOSFrechetDistanceDensify_r(context_, ga, gb, densify_fraction, out)
                                  : GEOSFrechetDistance_r(context_, ga, gb, out);
    });
  }

 private:
  template <typename Call>
  double binary(const Shape& a, const Shape& b, Call call) {
    GEOSGeometry* ga = GEOSWKTReader_read_r(context_, reader_, to_wkt(a).c_str());
    GEOSGeometry* gb = GEOSWKTReader_read_r(context_, reader_, to_wkt(b).c_str());
    double out = -1;
    const int ok = (ga && gb) ? call(ga, gb, &out) : 0;
    if (ga) GEOSGeom_destroy_r(context_, ga);
    if (gb) GEOSGeom_destroy_r(context_, gb);
    if (!ok) throw std::runtime_error("GEOS failed");
    return out;
  }

  GEOSContextHandle_t context_;
  GEOSWKTReader* reader_;
};

}  // namespace waymark::testing
