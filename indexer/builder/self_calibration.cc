#include "indexer/builder/self_calibration.h"

#include <ceres/ceres.h>
#include <ceres/rotation.h>

#include <Eigen/Sparse>
#include <Eigen/SparseCholesky>
#include <algorithm>
#include <boost/math/distributions/chi_squared.hpp>
#include <chrono>
#include <cmath>

#include "indexer/base/rotation.h"

namespace sightfix {

const char* const kCalibrationParameterNames[kCalibrationParameters] = {
    "focal_px", "k1", "k2", "boresight_x_rad", "boresight_y_rad", "boresight_z_rad"};

namespace {
constexpr double kDegToRad = M_PI / 180.0;

// Pixel residual of one observation, over pixel sigma. Blocks: intrinsics (f, k1, k2), boresight
// and the view's rotation correction (angle-axis), its centre, the point, the time offset dt. The
// row is exposed at t = dt + readout (row / (rows - 1) - 1/2) (readout 0: a global shutter), from
// the camera at t: centre + velocity t, turned by yaw_rate t about up (R0 Rz(-yaw_rate t)).
struct PixelCost {
  PixelCost(const CalibrationView& view, const cv::Point2d& pixel, const CameraModel& c,
            double sigma)
      : r0_(view.camera_from_world),
        velocity_(view.velocity),
        yaw_rate_(view.yaw_rate_rad_s),
        pixel_(pixel),
        row_time_(c.height_px > 1 ? c.readout_s * (pixel.y / (c.height_px - 1) - 0.5) : 0.0),
        aspect_(c.fy / c.fx),
        cx_(c.cx),
        cy_(c.cy),
        p1_(c.distortion[2]),
        p2_(c.distortion[3]),
        k3_(c.distortion[4]),
        inv_sigma_(1 / sigma) {}

  template <typename T>
  bool operator()(const T* intr, const T* bore, const T* delta, const T* center, const T* point,
                  const T* dt, T* residual) const {
    const T t = dt[0] + T(row_time_);
    T w[3];
    for (int i = 0; i < 3; ++i) w[i] = point[i] - center[i] - T(velocity_[i]) * t;
    const T yaw = T(yaw_rate_) * t, c = cos(yaw), s = sin(yaw);
    const T d[3] = {c * w[0] + s * w[1], -s * w[0] + c * w[1], w[2]};  // Rz(-yaw) w
    T p0[3], p1[3], p[3];
    for (int i = 0; i < 3; ++i)
      p0[i] = T(r0_(i, 0)) * d[0] + T(r0_(i, 1)) * d[1] + T(r0_(i, 2)) * d[2];
    ceres::AngleAxisRotatePoint(delta, p0, p1);
    ceres::AngleAxisRotatePoint(bore, p1, p);
    if (p[2] <= T(1e-9)) return false;
    const T x = p[0] / p[2], y = p[1] / p[2], r2 = x * x + y * y;
    const T radial = T(1) + r2 * (intr[1] + r2 * (intr[2] + r2 * T(k3_)));
    const T xd = x * radial + T(2 * p1_) * x * y + T(p2_) * (r2 + T(2) * x * x);
    const T yd = y * radial + T(p1_) * (r2 + T(2) * y * y) + T(2 * p2_) * x * y;
    residual[0] = (intr[0] * xd + T(cx_) - T(pixel_.x)) * T(inv_sigma_);
    residual[1] = (intr[0] * T(aspect_) * yd + T(cy_) - T(pixel_.y)) * T(inv_sigma_);
    return true;
  }

  cv::Matx33d r0_;
  cv::Vec3d velocity_;
  double yaw_rate_;
  cv::Point2d pixel_;
  double row_time_;
  double aspect_, cx_, cy_, p1_, p2_, k3_, inv_sigma_;
};

// Weighted offsets of an N-vector from its centre: w_i (x_i - x0_i); w_i = 0 adds nothing.
template <int N>
struct DiagonalPrior {
  std::array<double, N> centre{}, weight{};
  template <typename T>
  bool operator()(const T* x, T* residual) const {
    for (int i = 0; i < N; ++i) residual[i] = T(weight[i]) * (x[i] - T(centre[i]));
    return true;
  }
};

double Weight(double sigma) { return std::isfinite(sigma) && sigma > 0 ? 1 / sigma : 0; }

cv::Matx33d RotationOf(const double* angle_axis) {
  double r[9];
  ceres::AngleAxisToRotationMatrix(angle_axis, ceres::RowMajorAdapter3x3(r));
  return cv::Matx33d(r);
}

// The solver's state: every parameter block, owned here so Ceres can point into it.
struct State {
  std::array<double, 3> intr{}, bore{};
  std::array<double, 1> dt{};
  std::vector<std::array<double, 3>> delta, center;
  std::vector<std::array<double, 3>> points;
  std::vector<ceres::ResidualBlockId> pixel_blocks;
};

struct Solved {
  ceres::Solver::Summary summary;
  double rms_before_px = 0, rms_after_px = 0, chi2 = 0;
};

// Pixel RMS and chi-square (at pixel sigma) of the observations, without the loss.
void PixelFigures(ceres::Problem& problem, const State& st, double sigma, double* rms,
                  double* chi2) {
  ceres::Problem::EvaluateOptions eo;
  eo.residual_blocks = st.pixel_blocks;
  eo.apply_loss_function = false;
  std::vector<double> r;
  problem.Evaluate(eo, nullptr, &r, nullptr, nullptr);
  double sum = 0;
  for (double v : r) sum += v * v;
  *chi2 = sum;
  *rms = r.empty() ? 0 : sigma * std::sqrt(sum / (r.size() / 2));
}

class Adjustment {
 public:
  Adjustment(const CalibrationProblem& p, const SelfCalibrationOptions& o) : p_(p), o_(o) {}

  // Builds the problem with the intrinsics of `held` fixed at the supplied values (the time
  // offset at 0 when hold_dt).
  void Build(const std::array<bool, kCalibrationParameters>& held, bool hold_dt) {
    problem_ = std::make_unique<ceres::Problem>();
    const CameraModel& c = p_.camera;
    st_.pixel_blocks.clear();
    for (int i = 0; i < 3; ++i)
      if (held[i]) st_.intr[i] = Supplied(i);
    if (held[kBoresightX]) st_.bore = {0, 0, 0};
    if (hold_dt) st_.dt = {0};
    for (const CalibrationObservation& ob : p_.observations) {
      auto* cost = new ceres::AutoDiffCostFunction<PixelCost, 2, 3, 3, 3, 3, 3, 1>(
          new PixelCost(p_.views[ob.view], ob.pixel, c, o_.pixel_sigma_px));
      st_.pixel_blocks.push_back(problem_->AddResidualBlock(
          cost, new ceres::HuberLoss(o_.huber_px / o_.pixel_sigma_px), st_.intr.data(),
          st_.bore.data(), st_.delta[ob.view].data(), st_.center[ob.view].data(),
          st_.points[ob.point].data(), st_.dt.data()));
    }
    AddIntrinsicsBlock(held);
    AddBoresightBlock(held);
    AddTimeOffsetBlock(hold_dt);
    AddViewBlocks();
    for (auto& x : st_.points)
      if (p_.points_fixed && Free(x.data())) problem_->SetParameterBlockConstant(x.data());
  }

  void Solve(Solved* out) {
    ceres::Solver::Options so;
    so.linear_solver_type = ceres::SPARSE_SCHUR;
    so.sparse_linear_algebra_library_type = ceres::EIGEN_SPARSE;
    so.max_num_iterations = o_.max_iterations;
    so.num_threads = 1;  // the header says why
    so.logging_type = ceres::SILENT;
    double chi2;
    PixelFigures(*problem_, st_, o_.pixel_sigma_px, &out->rms_before_px, &chi2);
    ceres::Solve(so, problem_.get(), &out->summary);
    PixelFigures(*problem_, st_, o_.pixel_sigma_px, &out->rms_after_px, &out->chi2);
  }

  // The six parameters' marginal covariance: H^-1's block by sparse Cholesky (the header), and
  // the time offset's variance (0 when held). Held parameters get zero rows and columns. False
  // when H is not positive definite.
  bool Covariance(const std::array<bool, kCalibrationParameters>& held, cv::Matx<double, 6, 6>* cov,
                  double* dt_variance, int* free_parameters) {
    std::vector<double*> blocks;
    std::vector<int> column_of;  // calibration parameter of each leading tangent column
    if (Free(st_.intr.data())) {
      blocks.push_back(st_.intr.data());
      for (int i = 0; i < 3; ++i)
        if (!held[i]) column_of.push_back(i);
    }
    if (Free(st_.bore.data())) {
      blocks.push_back(st_.bore.data());
      for (int i = kBoresightX; i <= kBoresightZ; ++i) column_of.push_back(i);
    }
    if (Free(st_.dt.data())) {
      blocks.push_back(st_.dt.data());
      column_of.push_back(kCalibrationParameters);  // the time offset's column
    }
    const int k = static_cast<int>(column_of.size());
    for (size_t v = 0; v < st_.delta.size(); ++v)
      for (double* b : {st_.delta[v].data(), st_.center[v].data()})
        if (Free(b)) blocks.push_back(b);
    for (auto& x : st_.points)
      if (Free(x.data())) blocks.push_back(x.data());
    *cov = cv::Matx<double, 6, 6>::zeros();
    *dt_variance = 0;
    *free_parameters = 0;
    for (double* b : blocks) *free_parameters += problem_->ParameterBlockTangentSize(b);
    if (k == 0) return true;
    ceres::Problem::EvaluateOptions eo;
    eo.parameter_blocks = blocks;
    eo.apply_loss_function = true;
    ceres::CRSMatrix jac;
    problem_->Evaluate(eo, nullptr, nullptr, nullptr, &jac);
    using Sparse = Eigen::SparseMatrix<double>;
    std::vector<Eigen::Triplet<double>> t;
    t.reserve(jac.values.size());
    for (int r = 0; r < jac.num_rows; ++r)
      for (int i = jac.rows[r]; i < jac.rows[r + 1]; ++i)
        t.emplace_back(r, jac.cols[i], jac.values[i]);
    Sparse j(jac.num_rows, jac.num_cols);
    j.setFromTriplets(t.begin(), t.end());
    const Sparse h = Sparse(j.transpose() * j);
    Eigen::SimplicialLDLT<Sparse> ldlt(h);
    if (ldlt.info() != Eigen::Success) return false;
    Eigen::MatrixXd rhs = Eigen::MatrixXd::Zero(h.rows(), k);
    for (int i = 0; i < k; ++i) rhs(i, i) = 1;
    const Eigen::MatrixXd x = ldlt.solve(rhs);
    if (ldlt.info() != Eigen::Success) return false;
    for (int a = 0; a < k; ++a) {
      if (!(x(a, a) > 0)) return false;
      if (column_of[a] == kCalibrationParameters) {
        *dt_variance = x(a, a);
        continue;
      }
      for (int b = 0; b < k; ++b)
        if (column_of[b] < kCalibrationParameters) (*cov)(column_of[a], column_of[b]) = x(a, b);
    }
    return true;
  }

  void Reset() {
    const CameraModel& c = p_.camera;
    st_.intr = {c.fx, c.distortion[0], c.distortion[1]};
    st_.bore = {0, 0, 0};
    st_.dt = {0};
    st_.delta.assign(p_.views.size(), {0, 0, 0});
    st_.center.resize(p_.views.size());
    for (size_t v = 0; v < p_.views.size(); ++v)
      st_.center[v] = {p_.views[v].center[0], p_.views[v].center[1], p_.views[v].center[2]};
    st_.points.resize(p_.points.size());
    for (size_t i = 0; i < p_.points.size(); ++i)
      st_.points[i] = {p_.points[i][0], p_.points[i][1], p_.points[i][2]};
  }

  double Supplied(int i) const {
    return i == kFocal ? p_.camera.fx : p_.camera.distortion[i == kK1 ? 0 : 1];
  }
  const State& state() const { return st_; }

 private:
  bool Free(double* block) const {
    return problem_->HasParameterBlock(block) && !problem_->IsParameterBlockConstant(block);
  }

  // A DiagonalPrior on a 3-block; nothing when every weight is 0 (free without a prior).
  void AddPrior(double* block, const std::array<double, 3>& centre,
                const std::array<double, 3>& weight) {
    if (weight == std::array<double, 3>{}) return;
    auto* prior = new DiagonalPrior<3>;
    prior->centre = centre, prior->weight = weight;
    problem_->AddResidualBlock(new ceres::AutoDiffCostFunction<DiagonalPrior<3>, 3, 3>(prior),
                               nullptr, block);
  }

  void AddIntrinsicsBlock(const std::array<bool, kCalibrationParameters>& held) {
    double* b = st_.intr.data();
    if (!problem_->HasParameterBlock(b)) return;
    std::vector<int> fixed;
    for (int i = 0; i < 3; ++i)
      if (held[i]) fixed.push_back(i);
    if (fixed.size() == 3) {
      problem_->SetParameterBlockConstant(b);
      return;
    }
    if (!fixed.empty()) problem_->SetManifold(b, new ceres::SubsetManifold(3, fixed));
    std::array<double, 3> centre, weight;
    for (int i = 0; i < 3; ++i)
      centre[i] = Supplied(i), weight[i] = held[i] ? 0 : Weight(p_.prior.sigma[i]);
    AddPrior(b, centre, weight);
  }

  void AddBoresightBlock(const std::array<bool, kCalibrationParameters>& held) {
    double* b = st_.bore.data();
    if (!problem_->HasParameterBlock(b)) return;
    if (held[kBoresightX]) {
      problem_->SetParameterBlockConstant(b);
      return;
    }
    std::array<double, 3> weight;
    for (int i = 0; i < 3; ++i) weight[i] = Weight(p_.prior.sigma[kBoresightX + i]);
    AddPrior(b, {0, 0, 0}, weight);
  }

  void AddTimeOffsetBlock(bool hold) {
    double* b = st_.dt.data();
    if (!problem_->HasParameterBlock(b)) return;
    if (hold) {
      problem_->SetParameterBlockConstant(b);
      return;
    }
    const double w = Weight(p_.prior.time_offset_s);
    if (w == 0) return;
    auto* prior = new DiagonalPrior<1>;
    prior->centre = {0}, prior->weight = {w};
    problem_->AddResidualBlock(new ceres::AutoDiffCostFunction<DiagonalPrior<1>, 1, 1>(prior),
                               nullptr, b);
  }

  void AddViewBlocks() {
    for (size_t v = 0; v < p_.views.size(); ++v) {
      double *delta = st_.delta[v].data(), *center = st_.center[v].data();
      if (!problem_->HasParameterBlock(delta)) continue;
      const CalibrationView& view = p_.views[v];
      if (view.attitude_sigma_rad == 0) problem_->SetParameterBlockConstant(delta);
      if (view.center_sigma_m == 0) problem_->SetParameterBlockConstant(center);
      const double wa = Weight(view.attitude_sigma_rad), wc = Weight(view.center_sigma_m);
      AddPrior(delta, {0, 0, 0}, {wa, wa, wa});
      AddPrior(center, {view.center[0], view.center[1], view.center[2]}, {wc, wc, wc});
    }
  }

  const CalibrationProblem& p_;
  const SelfCalibrationOptions& o_;
  State st_;
  std::unique_ptr<ceres::Problem> problem_;
};

Status CheckProblem(const CalibrationProblem& p, const SelfCalibrationOptions& o) {
  std::string error;
  if (!o.Validate(&error)) return Status::InvalidArgument(error);
  if (p.camera.lens != LensModel::kPinhole)
    return Status::InvalidArgument("self-calibration models pinhole lenses only");
  if (!p.camera.IsValid(&error)) return Status::InvalidArgument(error);
  for (double s : p.prior.sigma)
    if (!(s >= 0)) return Status::InvalidArgument("prior sigmas must be >= 0 (inf: free)");
  if (!(p.prior.time_offset_s >= 0))
    return Status::InvalidArgument("the time offset's prior sigma must be >= 0 (inf: free)");
  for (const CalibrationView& v : p.views)
    if (!std::isfinite(v.yaw_rate_rad_s) || !std::isfinite(v.velocity[0]) ||
        !std::isfinite(v.velocity[1]) || !std::isfinite(v.velocity[2]))
      return Status::InvalidArgument("a view's velocity or yaw rate is not finite");
  if (p.observations.size() < 10)
    return Status::InvalidArgument("self-calibration needs at least 10 observations");
  for (const CalibrationObservation& ob : p.observations)
    if (ob.view < 0 || ob.view >= static_cast<int>(p.views.size()) || ob.point < 0 ||
        ob.point >= static_cast<int>(p.points.size()))
      return Status::InvalidArgument("an observation names a view or point that does not exist");
  return Status::Ok();
}

// Whether the frames' attitude priors tell a rotation common to every frame (the boresight)
// apart from their own corrections: a typical frame's prior must be tighter than the
// boresight's. EXIF and GPX inputs carry no pitch and roll (2 deg priors): their common
// rotation is the attitude's own mean error, not the mounting.
bool BoresightSeparable(const CalibrationProblem& p) {
  std::vector<double> sigma;
  for (const CalibrationView& v : p.views) sigma.push_back(v.attitude_sigma_rad);
  if (sigma.empty()) return false;
  std::nth_element(sigma.begin(), sigma.begin() + sigma.size() / 2, sigma.end());
  const double prior = std::max(
      {p.prior.sigma[kBoresightX], p.prior.sigma[kBoresightY], p.prior.sigma[kBoresightZ]});
  return sigma[sigma.size() / 2] < prior;
}

// The chi-square move test (the header): estimate minus supplied value against P0 - P.
void MoveTest(const CalibrationProblem& p, const SelfCalibrationOptions& o,
              const std::array<double, kCalibrationParameters>& value, CalibrationEstimate* e) {
  std::vector<int> idx;
  for (int i = 0; i < kCalibrationParameters; ++i)
    if (e->estimated[i] && std::isfinite(p.prior.sigma[i]) && p.prior.sigma[i] > 0)
      idx.push_back(i);
  e->move_dof = static_cast<int>(idx.size());
  if (idx.empty()) return;
  const int n = e->move_dof;
  cv::Mat d(n, 1, CV_64F), c(n, n, CV_64F);
  for (int a = 0; a < n; ++a) {
    d.at<double>(a) = value[idx[a]];
    for (int b = 0; b < n; ++b)
      c.at<double>(a, b) = (a == b ? p.prior.sigma[idx[a]] * p.prior.sigma[idx[a]] : 0) -
                           e->covariance(idx[a], idx[b]);
  }
  e->move_chi2 = cv::Mat(d.t() * c.inv(cv::DECOMP_SVD) * d).at<double>(0);
  const boost::math::chi_squared chi(n);
  e->move_alarm = e->move_chi2 > boost::math::quantile(chi, o.alarm_probability);
}

// The adjusted views (CalibrationEstimate), each at its image's time.
void AdjustedViews(const CalibrationProblem& p, const State& st, CalibrationEstimate* e) {
  const cv::Matx33d b = e->boresight();
  for (size_t v = 0; v < p.views.size(); ++v) {
    const CalibrationView& view = p.views[v];
    const cv::Matx33d turn = RotationAboutUp(-view.yaw_rate_rad_s * st.dt[0]);  // as PixelCost
    e->camera_from_world.push_back(b * RotationOf(st.delta[v].data()) * view.camera_from_world *
                                   turn);
    e->centers.push_back(cv::Vec3d(st.center[v][0], st.center[v][1], st.center[v][2]) +
                         view.velocity * st.dt[0]);
  }
}

// The keep-prior rule (the header; the boresight as a whole) and a time offset dt within
// time_offset_sigmas of zero: holds them. True when it held any.
bool HoldUnimproved(const CalibrationProblem& p, const SelfCalibrationOptions& o,
                    const cv::Matx<double, 6, 6>& cov, double dt, double dt_variance,
                    bool bore_held, std::array<bool, kCalibrationParameters>* held_out,
                    bool* hold_dt) {
  std::array<bool, kCalibrationParameters>& held = *held_out;
  bool changed = false;
  for (int i = kFocal; i <= kK2; ++i) {
    const double prior = p.prior.sigma[i];
    if (held[i] || !std::isfinite(prior)) continue;
    if (std::sqrt(cov(i, i)) / prior > o.keep_prior_ratio) held[i] = changed = true;
  }
  if (!bore_held && std::isfinite(p.prior.sigma[kBoresightX])) {
    double worst = 0;
    for (int i = kBoresightX; i <= kBoresightZ; ++i)
      worst = std::max(worst, std::sqrt(cov(i, i)) / p.prior.sigma[i]);
    if (worst > o.keep_prior_ratio && !held[kBoresightX])
      held[kBoresightX] = held[kBoresightY] = held[kBoresightZ] = changed = true;
  }
  const double dt_prior = p.prior.time_offset_s;
  if (!*hold_dt &&
      ((std::isfinite(dt_prior) && std::sqrt(dt_variance) / dt_prior > o.keep_prior_ratio) ||
       std::abs(dt) < o.time_offset_sigmas * std::sqrt(dt_variance)))
    *hold_dt = changed = true;
  return changed;
}

}  // namespace

cv::Matx33d CalibrationEstimate::boresight() const { return RotationOf(boresight_rad.val); }

Result<CalibrationEstimate> SolveCalibration(const CalibrationProblem& p,
                                             const SelfCalibrationOptions& o) {
  Status ok = CheckProblem(p, o);
  if (!ok.ok()) return ok;
  const auto t0 = std::chrono::steady_clock::now();
  Adjustment adj(p, o);
  std::array<bool, kCalibrationParameters> held{};
  for (int i = 0; i < kCalibrationParameters; ++i) held[i] = p.prior.sigma[i] == 0;
  // The boresight is one block: held only as a whole.
  const bool bore_held =
      (held[kBoresightX] && held[kBoresightY] && held[kBoresightZ]) || !BoresightSeparable(p);
  held[kBoresightX] = held[kBoresightY] = held[kBoresightZ] = bore_held;
  // The time offset moves nothing when no view moves.
  bool moving = false;
  for (const CalibrationView& v : p.views)
    moving = moving || v.yaw_rate_rad_s != 0 || cv::norm(v.velocity) > 0;
  bool hold_dt = p.prior.time_offset_s == 0 || !moving;
  CalibrationEstimate e;
  Solved s;
  cv::Matx<double, 6, 6> cov;
  double dt_variance = 0;
  int free_parameters = 0;
  // Solve; hold the parameters the data do not improve and solve once more (the header).
  for (int pass = 0; pass < 2; ++pass) {
    adj.Reset();
    adj.Build(held, hold_dt);
    adj.Solve(&s);
    if (pass == 0) e.rms_before_px = s.rms_before_px;
    if (!adj.Covariance(held, &cov, &dt_variance, &free_parameters))
      return Status(StatusCode::kFailedPrecondition,
                    "self-calibration: the calibration is not observable (singular system)");
    if (!HoldUnimproved(p, o, cov, adj.state().dt[0], dt_variance, bore_held, &held, &hold_dt))
      break;
  }
  const State& st = adj.state();
  e.supplied = p.camera;
  e.refined = p.camera;
  e.refined.fx = st.intr[0];
  e.refined.fy = st.intr[0] * p.camera.fy / p.camera.fx;
  e.refined.distortion[0] = st.intr[1];
  e.refined.distortion[1] = st.intr[2];
  e.boresight_rad = cv::Vec3d(st.bore[0], st.bore[1], st.bore[2]);
  e.covariance = cov;
  std::array<double, kCalibrationParameters> move{};
  for (int i = 0; i < kCalibrationParameters; ++i) {
    e.prior_sigma[i] = p.prior.sigma[i];
    e.estimated[i] = !held[i];
    e.posterior_sigma[i] = held[i] ? p.prior.sigma[i] : std::sqrt(cov(i, i));
    move[i] = i < 3 ? st.intr[i] - adj.Supplied(i) : st.bore[i - 3];
  }
  MoveTest(p, o, move, &e);
  CalibrationUncertainty& u = e.refined.uncertainty;
  u.focal_px = e.posterior_sigma[kFocal], u.k1 = e.posterior_sigma[kK1];
  u.k2 = e.posterior_sigma[kK2];
  u.boresight_deg = std::max({e.posterior_sigma[kBoresightX], e.posterior_sigma[kBoresightY],
                              e.posterior_sigma[kBoresightZ]}) /
                    kDegToRad;
  e.time_offset_s = st.dt[0];
  e.time_offset_prior_sigma_s = p.prior.time_offset_s;
  e.time_offset_estimated = !hold_dt;
  e.time_offset_sigma_s = hold_dt ? p.prior.time_offset_s : std::sqrt(dt_variance);
  e.rms_after_px = s.rms_after_px;
  e.observations = static_cast<int>(p.observations.size());
  e.views = static_cast<int>(p.views.size());
  e.points = static_cast<int>(p.points.size());
  e.variance_factor = s.chi2 / std::max(1, 2 * e.observations - free_parameters);
  AdjustedViews(p, st, &e);
  for (const auto& x : st.points) e.adjusted_points.emplace_back(x[0], x[1], x[2]);
  e.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  return e;
}

}  // namespace sightfix
