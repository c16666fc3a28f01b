#include "indexer/builder/geoid.h"

#include <proj.h>

#include <cmath>
#include <mutex>

namespace sightfix {

constexpr char kEgm96Grid[] = "egm96_15.gtx";

struct Geoid::Impl {
  PJ_CONTEXT* ctx = nullptr;
  PJ* shift = nullptr;  // vgridshift: forward gives z - N (ellipsoidal to orthometric)
  std::mutex mu;        // a PJ is not re-entrant
  ~Impl() {
    if (shift) proj_destroy(shift);
    if (ctx) proj_context_destroy(ctx);
  }
};

Geoid::Geoid(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Geoid::~Geoid() = default;

Result<std::unique_ptr<Geoid>> Geoid::OpenEgm96() {
  auto impl = std::make_unique<Impl>();
  impl->ctx = proj_context_create();
  proj_log_level(impl->ctx, PJ_LOG_NONE);
  // multiplier -1: z_out = z_in - N (PROJ's vgridshift convention).
  const std::string pipeline = std::string(
                                   "+proj=pipeline +step +proj=unitconvert +xy_in=deg "
                                   "+xy_out=rad +step +proj=vgridshift +grids=") +
                               kEgm96Grid +
                               " +multiplier=-1 +step +proj=unitconvert +xy_in=rad +xy_out=deg";
  impl->shift = proj_create(impl->ctx, pipeline.c_str());
  if (!impl->shift)
    return Status::NotFound(std::string("cannot load the EGM96 geoid grid ") + kEgm96Grid +
                            " (Debian package proj-data)");
  return std::unique_ptr<Geoid>(new Geoid(std::move(impl)));
}

double Geoid::Undulation(double lat_deg, double lon_deg) const {
  std::lock_guard<std::mutex> lock(impl_->mu);
  // The pipeline's axis order is longitude, latitude (a PROJ string, not an EPSG CRS).
  const PJ_COORD in = proj_coord(lon_deg, lat_deg, 0, HUGE_VAL);
  const PJ_COORD out = proj_trans(impl_->shift, PJ_FWD, in);
  if (!std::isfinite(out.xyz.z) || out.xyz.z == HUGE_VAL) return NAN;
  return -out.xyz.z;  // 0 - N
}

}  // namespace sightfix
