// opspace._kernel: the simulation's inner loop, compiled.
//
// The same equations as the Python reference in opspace/simulate/loop.py
// (`_Plant.accel`, `_rk4`, the semi-implicit Euler step), which the tests
// compare this with to round-off; opspace.simulate's docstring has the model:
//
//   M ν̇ = Q − h − f,   M = Sᵀ M_full(q) S,   h = Sᵀ nle(q, S ν)
//   f = F_k s + f_v ν + f_rr(ν)   (Karnopp stick-slip: s the friction direction
//                                  frozen at the step start, stuck coordinates
//                                  held; f_rr: rolling resistance with the static
//                                  loads frozen at the step start)
//
// S is the constant reduction map of the differential-drive base (the planar
// root's velocity is in the chassis frame).  Locked coordinates keep ν = 0 and
// the free block obeys M_ff ν̇_f = (Q − h − f)_f.  One call advances one step.
//
// Built by hatch_build.py against the Pinocchio, eigenpy and Boost.Python of
// the `pin` wheel; opspace/_compiled.py checks the versions match at import.
//
// The named terms of opspace/dynamics/_terms.py are here too (`Terms`: M_r,
// h_r, g_r, J_r, J̇ν, friction, rolling resistance, static contact loads),
// and the friction model is one `FrictionModel` with named fields, read by
// `Friction`; the controller takes its options by name (`ControllerOptions`)
// and describes its own buffers (`target_layout`, `output_layout`).

#include <pinocchio/algorithm/center-of-mass.hpp>
#include <pinocchio/algorithm/crba.hpp>
#include <pinocchio/algorithm/frames.hpp>
#include <pinocchio/algorithm/joint-configuration.hpp>
#include <pinocchio/algorithm/kinematics.hpp>
#include <pinocchio/algorithm/rnea.hpp>
#include <pinocchio/spatial.hpp>
#include <pinocchio/multibody.hpp>

#include <eigenpy/eigenpy.hpp>
#include <boost/python.hpp>

#include <cmath>
#include <limits>
#include <stdexcept>
#include <vector>

namespace bp = boost::python;
using Model = pinocchio::Model;
using Data = pinocchio::Data;
using Eigen::MatrixXd;
using Eigen::VectorXd;
using RefV = Eigen::Ref<VectorXd>;
using CRefV = const Eigen::Ref<const VectorXd>&;

namespace {

inline double sign(double x) { return x > 0.0 ? 1.0 : (x < 0.0 ? -1.0 : 0.0); }

// Rolling resistance with the static contact loads of one configuration
// (`RollingLoads` in opspace/dynamics/joint_space.py): N = W A [1, x_p, y_p]
// (x_p, y_p: the COM's ground projection in the chassis frame, N ≥ 0), wheel
// torques C_rr N_i r sign(φ̇_i), and each caster's force C_rr N_c against its
// ground velocity (J_x ν, J_y ν), which only the wheel rates move.
class Rolling {
 public:
  // A (2 + n_casters, 3); casters (n_casters, 4) = (J_x0, J_x1, J_y0, J_y1)
  Rolling(const MatrixXd& A, const MatrixXd& casters, double c_rr, double r)
      : A_(A), casters_(casters), c_rr_(c_rr), r_(r),
        cN_(static_cast<size_t>(casters.rows()), 0.0) {}

  // contact i's resistance level of the last `load`: C_rr N_i r on a drive
  // wheel (i < 2), C_rr N_i on a caster (with c_rr = r = 1: the load N_i)
  double level(Eigen::Index i) const { return i == 0 ? k0_ : i == 1 ? k1_ : cN_[size_t(i - 2)]; }
  Eigen::Index contacts() const { return 2 + casters_.rows(); }

  // the loads at q (forward kinematics and the COM into data); `placed`: the
  // joint placements in data are those of q already (no kinematics pass)
  void load(const Model& model, Data& data, CRefV q, bool placed = false) {
    const Eigen::Vector3d com = placed ? pinocchio::centerOfMass(model, data, pinocchio::POSITION,
                                                                 false)
                                       : pinocchio::centerOfMass(model, data, q, false);
    const double dx = com[0] - q[0], dy = com[1] - q[1], c = q[2], s = q[3];
    const double xp = c * dx + s * dy, yp = c * dy - s * dx;
    const double W = data.mass[0] * -model.gravity.linear()[2];
    auto N = [&](Eigen::Index i) {
      return std::max(W * (A_(i, 0) + A_(i, 1) * xp + A_(i, 2) * yp), 0.0);
    };
    k0_ = c_rr_ * r_ * N(0);
    k1_ = c_rr_ * r_ * N(1);
    for (Eigen::Index i = 0; i < casters_.rows(); ++i) cN_[size_t(i)] = c_rr_ * N(2 + i);
  }

  // (f_r, f_l) on the wheel coordinates (left-hand side) at wheel rates w0, w1
  void efforts(double w0, double w1, double& f0, double& f1) const {
    caster_efforts(w0, w1, f0, f1);
    f0 += k0_ * sign(w0);
    f1 += k1_ * sign(w1);
  }

  // the wheel torques' levels k_i = C_rr N_i r of the loads last computed
  double k0() const { return k0_; }
  double k1() const { return k1_; }

  // the casters' share of `efforts` alone (RollingLoads.caster_efforts)
  void caster_efforts(double w0, double w1, double& f0, double& f1) const {
    f0 = 0.0;
    f1 = 0.0;
    for (Eigen::Index i = 0; i < casters_.rows(); ++i) {
      const double cN = cN_[size_t(i)];
      if (!(cN > 0.0)) continue;
      const double jx0 = casters_(i, 0), jx1 = casters_(i, 1), jy0 = casters_(i, 2),
                   jy1 = casters_(i, 3);
      const double vx = jx0 * w0 + jx1 * w1, vy = jy0 * w0 + jy1 * w1;
      const double speed = std::hypot(vx, vy);
      if (speed > 0.0) {
        const double k = cN / speed;
        f0 += k * (vx * jx0 + vy * jy0);
        f1 += k * (vx * jx1 + vy * jy1);
      }
    }
  }

 private:
  MatrixXd A_, casters_;
  double c_rr_, r_, k0_ = 0.0, k1_ = 0.0;
  std::vector<double> cN_;
};

// The friction model, named (`opspace.dynamics._terms`): f_C, f_v (nv,)
// per coordinate, the static-load rows A⁺ (2 + n_casters, 3) and the casters'
// ground-velocity rows (n_casters, 4) = (J_x0, J_x1, J_y0, J_y1), C_rr and
// the wheel radius r (m).  Bound to Python with these field names.
struct FrictionModel {
  VectorXd coulomb, viscous;
  MatrixXd contact_rows, caster_rows;
  double rolling_resistance = 0.0, wheel_radius = 0.0;
};

// Friction on the left-hand side, f = f_C σ(ν) + f_v ν + f_rr(q, ν), with
// σ = sign, or tanh(ν / v_s) when smoothing v_s > 0 (`coulomb_viscous`,
// `RollingLoads`).  The rolling part uses the loads of the last `load`.
// A friction law with more state (stick-slip) extends this class.
class Friction {
 public:
  explicit Friction(const FrictionModel& m)
      : m_(m), rolling_(m.contact_rows, m.caster_rows, m.rolling_resistance, m.wheel_radius),
        has_rolling_(m.rolling_resistance > 0.0) {}

  bool has_rolling() const { return has_rolling_; }
  void load(const Model& model, Data& data, CRefV q, bool placed = false) {
    rolling_.load(model, data, q, placed);
  }

  // f_C σ(ν) + f_v ν, element by element into f
  template <class Out>
  void coulomb_viscous(CRefV nu, double smoothing, Out&& f) const {
    for (Eigen::Index i = 0; i < nu.size(); ++i) {
      const double s = smoothing > 0.0 ? std::tanh(nu[i] * (1.0 / smoothing)) : sign(nu[i]);
      f[i] = m_.coulomb[i] * s + m_.viscous[i] * nu[i];
    }
  }

  // (f_r, f_l) of the rolling resistance at the loaded configuration
  void rolling(CRefV nu, double& f0, double& f1) const { rolling_.efforts(nu[0], nu[1], f0, f1); }

 private:
  FrictionModel m_;
  Rolling rolling_;
  bool has_rolling_;
};

// The reduction of the differential-drive base, S = [A 0; I₂ 0; 0 I] (the
// planar root's chassis-frame twist (v_x, v_y, ω) = A φ̇ from the wheel rates;
// wheels and arm map to themselves: `MobileManipulator._reduction_map`), used
// by blocks instead of dense products:  Sᵀ M S, Sᵀ f, S ν, J S.
class Reduction {
 public:
  explicit Reduction(const MatrixXd& S) : nv_(S.cols()), na_(S.cols() - 2) {
    const bool shape = S.rows() == nv_ + 3 && nv_ >= 2;
    if (!shape || !S.bottomRows(nv_).isIdentity(0.0) || !S.topRightCorner(3, na_).isZero(0.0))
      throw std::invalid_argument("S must be [A 0; I] with A (3, 2): the planar root "
                                  "followed by the wheels and the arm");
    A_ = S.topLeftCorner<3, 2>();
  }

  // Mr = Sᵀ M S (symmetric) from the upper triangle of the full M (CRBA's)
  template <class Out>
  void mass(const MatrixXd& M, Out&& Mr) const {
    const Eigen::Index na = na_;
    const Eigen::Matrix3d Mbb = M.topLeftCorner<3, 3>().selfadjointView<Eigen::Upper>();
    const Eigen::Matrix2d Mww = M.block<2, 2>(3, 3).selfadjointView<Eigen::Upper>();
    const Eigen::Matrix2d C = A_.transpose() * M.block<3, 2>(0, 3);       // Aᵀ M_bw
    Mr.template topLeftCorner<2, 2>() = A_.transpose() * Mbb * A_ + C + C.transpose() + Mww;
    Mr.topRightCorner(2, na).noalias() = A_.transpose() * M.block(0, 5, 3, na);
    Mr.topRightCorner(2, na) += M.block(3, 5, 2, na);
    Mr.bottomRightCorner(na, na).template triangularView<Eigen::Upper>() =
        M.bottomRightCorner(na, na);
    Mr.template triangularView<Eigen::StrictlyLower>() = Mr.transpose();
  }

  // Sᵀ f for a full generalized force f (nv + 3)
  template <class In, class Out>
  void force(const In& f, Out&& out) const {
    out.template head<2>().noalias() = A_.transpose() * f.template head<3>();
    out.template head<2>() += f.template segment<2>(3);
    out.tail(na_) = f.tail(na_);
  }

  // S ν
  template <class Out>
  void velocity(CRefV nu, Out&& v) const {
    v.template head<3>().noalias() = A_ * nu.head<2>();
    v.tail(nv_) = nu;
  }

  // one row of J S from a row of the full Jacobian
  template <class In, class Out>
  void jacobian_row(const In& j, Out&& out) const {
    out.template head<2>().noalias() = j.template head<3>() * A_;
    out.template head<2>() += j.template segment<2>(3);
    out.tail(na_) = j.tail(na_);
  }

 private:
  Eigen::Index nv_, na_;
  Eigen::Matrix<double, 3, 2> A_;
};

// Forward dynamics of the reduced coordinates and the RK4 / Euler steps, with
// the stick-slip friction and the hard joint stops decided at each step's
// start (opspace/dynamics/stick_slip.py, `StickSlip.begin`, has the model and
// is the reference of `begin` below, operation for operation).
class Plant {
 public:
  // S (nv_full, nv); locked (nv,) 1 = held still by the caller; Fk, Fs, fv (nv,)
  // kinetic, static and viscous friction (zeros when friction is off);
  // frictional (nv,) 1 = takes part in sticking; lo, hi (nv,) stop limits and
  // qi (nv,) their index in q (-1: no stop); rolling: A (2 + n_casters, 3) the
  // static-load map N = W A [1, x_p, y_p], casters (n_casters, 4) =
  // (J_x0, J_x1, J_y0, J_y1) on the wheel columns, c_rr (0 = none), r wheel radius m.
  Plant(const MatrixXd& S, const VectorXd& locked, const VectorXd& Fk, const VectorXd& Fs,
        const VectorXd& fv, const VectorXd& frictional, const VectorXd& lo, const VectorXd& hi,
        const VectorXd& qi, const MatrixXd& A, const MatrixXd& casters, double c_rr, double r)
      : S_(S), red_(S), Fk0_(Fk), Fs0_(Fs), fv_(fv), lo_(lo), hi_(hi), rolling_model_(A, casters,
                                                                                  c_rr, r) {
    const Eigen::Index nv = S.cols();
    nv_ = nv;
    for (Eigen::Index i = 0; i < nv; ++i) {
      locked_.push_back(locked[i] != 0.0);
      frictional_.push_back(frictional[i] != 0.0);
      qi_.push_back(static_cast<int>(qi[i]));
      if (qi[i] >= 0.0) stop_coords_.push_back(static_cast<int>(i));
    }
    rolling_ = c_rr > 0.0;
    held_.assign(size_t(nv), false);
    side_.assign(size_t(nv), 0);
    first_stop_ = VectorXd::Constant(nv, -1.0);
    stop_side_ = VectorXd::Zero(nv);
    s_ = VectorXd::Zero(nv);
    Fk_ = Fk0_;
    set_free();
    v_.resize(S.rows());
    dq_.resize(S.rows());
    rhs_.resize(nv);
    base_.resize(nv);
    H_.resize(nv);
    Mr_.resize(nv, nv);
    a2_.resize(nv);
    a3_.resize(nv);
    a4_.resize(nv);
    nu2_.resize(nv);
    nu3_.resize(nv);
    nu4_.resize(nv);
  }

  // One classical RK4 step (as `_rk4`): q, ν advanced in place, ν̇ at the
  // start written to nu_dot.  Returns 0, 1 when M is not PD, 2 when the new
  // state is not finite (NaN or inf).
  int rk4(const Model& model, Data& data, RefV q, RefV nu, CRefV Q, double h, RefV nu_dot) {
    if (!begin(model, data, q, nu, Q, nu_dot)) return 1;
    const double h2 = 0.5 * h;
    nu2_ = nu + h2 * nu_dot;
    if (!stage(model, data, q, nu, h2, nu2_, Q, a2_)) return 1;
    nu3_ = nu + h2 * a2_;
    if (!stage(model, data, q, nu2_, h2, nu3_, Q, a3_)) return 1;
    nu4_ = nu + h * a3_;
    if (!stage(model, data, q, nu3_, h, nu4_, Q, a4_)) return 1;
    // q⁺ = q ⊕ h S (ν₁ + 2ν₂ + 2ν₃ + ν₄)/6,  ν⁺ = ν + h (ν̇₁ + 2ν̇₂ + 2ν̇₃ + ν̇₄)/6
    dq_.noalias() = S_ * ((h / 6.0) * (nu + 2.0 * (nu2_ + nu3_) + nu4_));
    integrate(model, q);
    nu += (h / 6.0) * (nu_dot + 2.0 * (a2_ + a3_) + a4_);
    return finite(q, nu) ? 0 : 2;
  }

  // Semi-implicit Euler: ν⁺ = ν + h ν̇(q, ν), q⁺ = q ⊕ h S ν⁺.
  int euler(const Model& model, Data& data, RefV q, RefV nu, CRefV Q, double h, RefV nu_dot) {
    if (!begin(model, data, q, nu, Q, nu_dot)) return 1;
    nu += h * nu_dot;
    dq_.noalias() = S_ * (h * nu);
    integrate(model, q);
    return finite(q, nu) ? 0 : 2;
  }

  // The step's start alone (the last recorded sample): ν̇ at (q, ν).
  int accel_only(const Model& model, Data& data, RefV q, RefV nu, CRefV Q, RefV nu_dot) {
    return begin(model, data, q, nu, Q, nu_dot) ? 0 : 1;
  }

  // out (3 nv + 1) = [held (nv) | first stop step (nv, -1 none) | its side | loss J]
  void state(RefV out) const {
    for (Eigen::Index i = 0; i < nv_; ++i) out[i] = held_[size_t(i)] ? 1.0 : 0.0;
    out.segment(nv_, nv_) = first_stop_;
    out.segment(2 * nv_, nv_) = stop_side_;
    out[3 * nv_] = loss_;
  }

 private:
  // StickSlip.begin: stops, impulses, the stuck set, the frozen directions
  bool begin(const Model& model, Data& data, RefV q, RefV nu, CRefV Q, RefV nu_dot) {
    const Eigen::Index nv = nv_;
    ++step_;
    bool impact = false;
    for (int i : stop_coords_) {
      const size_t k = size_t(i);
      const int j = qi_[k];
      side_[k] = 0;
      if (q[j] >= hi_[i] && nu[i] >= 0.0)
        side_[k] = 1;
      else if (q[j] <= lo_[i] && nu[i] <= 0.0)
        side_[k] = -1;
      if (side_[k] != 0) {
        if (nu[i] != 0.0) impact = true;
        if (nu[i] != 0.0 && first_stop_[i] < 0.0) {   // arrived, not resting
          first_stop_[i] = double(step_);
          stop_side_[i] = side_[k];
        }
      }
    }
    pinocchio::crba(model, data, q, pinocchio::Convention::WORLD);
    red_.mass(data.M, Mr_);
    if (impact) {
      std::vector<char> I(size_t(nv), false), fixed(size_t(nv), false);
      for (Eigen::Index i = 0; i < nv; ++i) {
        const size_t k = size_t(i);
        I[k] = side_[k] != 0 && nu[i] != 0.0;
        fixed[k] = locked_[k] || (held_[k] && side_[k] == 0);
      }
      if (!impulse(nu, I, fixed)) return false;
    }
    red_.velocity(nu, v_);
    pinocchio::nonLinearEffects(model, data, q, v_);
    red_.force(data.nle, rhs_);
    base_ = Q - rhs_;
    base_ -= fv_.cwiseProduct(nu);
    Fk_ = Fk0_;
    VectorXd Fs = Fs0_;
    if (rolling_) {
      rolling_model_.load(model, data, q);
      Fk_[0] += rolling_model_.k0();
      Fk_[1] += rolling_model_.k1();
      Fs[0] += rolling_model_.k0();
      Fs[1] += rolling_model_.k1();
      double c0, c1;
      rolling_model_.caster_efforts(nu[0], nu[1], c0, c1);
      base_[0] -= c0;
      base_[1] -= c1;
    }
    std::vector<char> C(size_t(nv), false);
    for (Eigen::Index i = 0; i < nv; ++i) {
      const size_t k = size_t(i);
      C[k] = !locked_[k] && (held_[k] || side_[k] != 0 ||
                             (frictional_[k] && (nu[i] == 0.0 || nu[i] * s_[i] < 0.0)));
      s_[i] = C[k] ? 0.0 : sign(nu[i]);
    }
    held_ = C;
    while (true) {
      set_free();
      rhs_ = base_ - Fk_.cwiseProduct(s_);
      if (!solve_free(Mr_, rhs_, nu_dot)) return false;
      bool any = false;
      for (char c : held_) any = any || c;
      if (!any) break;
      H_ = base_;
      H_.noalias() -= Mr_ * nu_dot;
      Eigen::Index best = -1;
      double worst = -std::numeric_limits<double>::infinity();
      for (Eigen::Index i = 0; i < nv; ++i) {
        const size_t k = size_t(i);
        if (!held_[k]) continue;
        const double e = side_[k] > 0 ? -H_[i] - Fs[i]
                         : side_[k] < 0 ? H_[i] - Fs[i] : std::abs(H_[i]) - Fs[i];
        if (e > worst) {
          worst = e;
          best = i;
        }
      }
      if (!(worst > 0.0)) break;
      held_[size_t(best)] = false;
      s_[best] = nu[best] != 0.0 ? sign(nu[best]) : sign(H_[best]);
    }
    bool reset = false;
    std::vector<char> I(size_t(nv), false), fixed(size_t(nv), false);
    for (Eigen::Index i = 0; i < nv; ++i) {
      const size_t k = size_t(i);
      I[k] = held_[k] && nu[i] != 0.0;
      fixed[k] = locked_[k] || (held_[k] && !I[k]);
      reset = reset || I[k];
    }
    if (reset && !impulse(nu, I, fixed)) return false;
    return true;
  }

  // ν_I → 0 by a plastic impulse on I with `fixed` still; the loss into loss_
  bool impulse(RefV nu, const std::vector<char>& I, const std::vector<char>& fixed) {
    const double T0 = 0.5 * nu.dot(Mr_ * nu);
    std::vector<int> F, J;
    for (Eigen::Index i = 0; i < nv_; ++i) {
      if (I[size_t(i)]) J.push_back(int(i));
      else if (!fixed[size_t(i)]) F.push_back(int(i));
    }
    if (!F.empty()) {
      const Eigen::Index n = Eigen::Index(F.size());
      MatrixXd Mff(n, n);
      VectorXd b = VectorXd::Zero(n);
      for (Eigen::Index a = 0; a < n; ++a) {
        for (Eigen::Index c = 0; c < n; ++c) Mff(a, c) = Mr_(F[size_t(a)], F[size_t(c)]);
        for (int j : J) b[a] += Mr_(F[size_t(a)], j) * nu[j];
      }
      Eigen::LLT<MatrixXd> llt(Mff);
      if (llt.info() != Eigen::Success) return false;
      const VectorXd x = llt.solve(b);
      for (Eigen::Index a = 0; a < n; ++a) nu[F[size_t(a)]] += x[a];
    }
    for (int j : J) nu[j] = 0.0;
    loss_ += T0 - 0.5 * nu.dot(Mr_ * nu);
    return true;
  }

  void set_free() {
    free_.clear();
    for (Eigen::Index i = 0; i < nv_; ++i)
      if (!locked_[size_t(i)] && !held_[size_t(i)]) free_.push_back(int(i));
    all_free_ = Eigen::Index(free_.size()) == nv_;
  }

  // out = M_FF⁻¹ rhs_F on the free coordinates, zero on the held ones
  bool solve_free(const MatrixXd& M, const VectorXd& rhs, RefV out) {
    if (all_free_) {
      llt_.compute(M);
      if (llt_.info() != Eigen::Success) return false;
      out = llt_.solve(rhs);
      return true;
    }
    const Eigen::Index n = static_cast<Eigen::Index>(free_.size());
    out.setZero();
    if (n == 0) return true;
    MatrixXd Mff(n, n);
    VectorXd rf(n);
    for (Eigen::Index i = 0; i < n; ++i) {
      rf[i] = rhs[free_[size_t(i)]];
      for (Eigen::Index j = 0; j < n; ++j) Mff(i, j) = M(free_[size_t(i)], free_[size_t(j)]);
    }
    llt_.compute(Mff);
    if (llt_.info() != Eigen::Success) return false;
    const VectorXd x = llt_.solve(rf);
    for (Eigen::Index i = 0; i < n; ++i) out[free_[size_t(i)]] = x[i];
    return true;
  }

  // ν̇ inside the step at (q, ν): the held set and directions of its start
  bool accel(const Model& model, Data& data, CRefV q, CRefV nu, CRefV Q, RefV out) {
    red_.velocity(nu, v_);
    pinocchio::crba(model, data, q, pinocchio::Convention::WORLD);
    red_.mass(data.M, Mr_);
    pinocchio::nonLinearEffects(model, data, q, v_);
    red_.force(data.nle, rhs_);
    rhs_ = Q - rhs_;
    H_ = Fk_.cwiseProduct(s_);          // f = F_k s + f_v ν (+ the casters), StickSlip.stage_friction
    H_ += fv_.cwiseProduct(nu);
    if (rolling_) {
      double c0, c1;
      rolling_model_.caster_efforts(nu[0], nu[1], c0, c1);
      H_[0] += c0;
      H_[1] += c1;
    }
    rhs_ -= H_;
    return solve_free(Mr_, rhs_, out);
  }

  // the stage acceleration at q ⊕ c h S ν_prev with rates ν_i
  bool stage(const Model& model, Data& data, CRefV q, CRefV nu_prev, double ch, CRefV nu_i,
             CRefV Q, RefV out) {
    dq_.noalias() = S_ * (ch * nu_prev);
    qs_.resize(q.size());
    pinocchio::integrate(model, q, dq_, qs_);
    return accel(model, data, qs_, nu_i, Q, out);
  }

  static bool finite(CRefV q, CRefV nu) { return q.allFinite() && nu.allFinite(); }

  void integrate(const Model& model, RefV q) {
    qs_.resize(q.size());
    pinocchio::integrate(model, q, dq_, qs_);
    q = qs_;
  }

  MatrixXd S_;
  Reduction red_;
  VectorXd Fk0_, Fs0_, fv_, lo_, hi_, Fk_, s_, first_stop_, stop_side_;
  Eigen::Index nv_;
  bool rolling_, all_free_ = true;
  std::vector<char> locked_, frictional_, held_;
  std::vector<int> qi_, stop_coords_, side_, free_;
  long step_ = -1;
  double loss_ = 0.0;
  Rolling rolling_model_;
  VectorXd v_, dq_, rhs_, base_, H_, qs_, a2_, a3_, a4_, nu2_, nu3_, nu4_;
  MatrixXd Mr_;
  Eigen::LLT<MatrixXd> llt_;
};

// The controller's settings, named (bound to Python with these field names).
struct ControllerOptions {
  int frame_id = 0;                 // the task frame
  bool whole_body = true;           // false: arm only, the wheels on their servo
  bool angular = false;             // the task has angular rows (a target rotation)
  bool posture = false;             // a posture q₀ in the null space
  bool friction_feedforward = false;
  double wheel_radius = 0.0, half_track = 0.0;  // m
  double wheel_gain = 0.0;          // K_w, 1/s
  double friction_velocity = 0.0;   // v_s of the smoothed Coulomb term (0: sign)
  double damping2 = 0.0;            // ε² of the damped task inverse
};

// The command's target vector x, one field after the other: its only
// description (Python packs by these names, `Controller.target_layout()`).
enum TargetField : Eigen::Index { kPosition = 0, kRotation = 3, kVelocity = 12,
                                  kAcceleration = 18, kPlanV = 24, kPlanOmega = 25,
                                  kPlanA = 26, kPlanAlpha = 27, kTargetSize = 28 };

bp::list target_layout() {
  bp::list out;
  const char* names[] = {"position", "rotation", "velocity", "acceleration", "plan_v",
                         "plan_omega", "plan_a", "plan_alpha"};
  const Eigen::Index at[] = {kPosition, kRotation, kVelocity, kAcceleration, kPlanV,
                             kPlanOmega, kPlanA, kPlanAlpha, kTargetSize};
  for (int i = 0; i < 8; ++i) out.append(bp::make_tuple(names[i], at[i], at[i + 1] - at[i]));
  return out;
}

// The command's output buffer, one field after the other (rows, columns;
// matrices row-major): its only description (`Controller.output_layout()`).
enum OutputField { kQSent, kQ, kLB, kJdotNu, kG, kM, kH, kZ, kJ, kOutputFields };

std::vector<std::pair<Eigen::Index, Eigen::Index>> output_shapes(Eigen::Index nv,
                                                                 Eigen::Index k) {
  return {{nv, 1}, {nv, 1}, {k, k + 1}, {k, 1}, {k + nv, 1}, {nv, nv}, {nv, 1},
          {6 + 2 * k, 1}, {k, nv}};
}

bp::list output_layout(Eigen::Index nv, Eigen::Index k) {
  const char* names[] = {"Q_sent", "Q", "LB", "Jdot_nu", "g", "M", "h", "z", "J"};
  bp::list out;
  Eigen::Index at = 0;
  const auto shapes = output_shapes(nv, k);
  for (int i = 0; i < kOutputFields; ++i) {
    out.append(bp::make_tuple(names[i], at, shapes[size_t(i)].first, shapes[size_t(i)].second));
    at += shapes[size_t(i)].first * shapes[size_t(i)].second;
  }
  return out;
}

// The task-space computed-torque command (OperationalSpaceController._command).
class Controller {
 public:
  // S (nv_full, nv); GG (k + nv, 6 + 2k + nv + n_arm) = diag(G, G0); q0 (n_arm,)
  // posture; limit (nv,); rows (k,) task rows of [linear; angular]; the
  // options and the friction model, named.
  Controller(const MatrixXd& S, const MatrixXd& GG, const VectorXd& q0, const VectorXd& limit,
             const VectorXd& rows, const ControllerOptions& o, const FrictionModel& friction)
      : red_(S), GG_(GG), q0_(q0), limit_(limit), friction_model_(friction) {
    for (Eigen::Index i = 0; i < rows.size(); ++i) rows_.push_back(static_cast<int>(rows[i]));
    fid_ = static_cast<pinocchio::FrameIndex>(o.frame_id);
    whole_body_ = o.whole_body;
    angular_ = o.angular;
    posture_ = o.posture;
    friction_ = o.friction_feedforward;
    rolling_ = friction_model_.has_rolling();
    r_ = o.wheel_radius, b_ = o.half_track, kw_ = o.wheel_gain, vs_ = o.friction_velocity;
    eps2_ = o.damping2;
    k_ = static_cast<Eigen::Index>(rows_.size());
    nv_ = S.cols();
    n_arm_ = nv_ - 2;
    J6_ = MatrixXd::Zero(6, S.rows());
    w_ = VectorXd::Zero(GG.cols());
    zero_ = VectorXd::Zero(S.rows());
    v_.resize(S.rows());
    Jnu_.resize(k_);
    bvec_.resize(k_);
    M_nd0_.resize(nv_);
    fe_.resize(k_ + 1);
    nu_dot_.resize(nv_);
    f_.resize(nv_);
    eye_ = MatrixXd::Identity(k_, k_);
    const auto shapes = output_shapes(nv_, k_);
    Eigen::Index at = 0;
    for (const auto& rc : shapes) {
      offsets_.push_back(at);
      at += rc.first * rc.second;
    }
    out_size_ = at;
    rhs_.resize(whole_body_ ? nv_ : nv_ - 2, k_ + 1);
  }

  // x: the target (`TargetField`); out: the output buffer (`OutputField`,
  // `output_layout`).  Returns 0, 1 when a buffer has the wrong size, or 2 when
  // the task mobility is not safely invertible (the caller takes the damped path).
  int command(const Model& model, Data& data, CRefV q, CRefV nu, CRefV x, RefV out) {
    using RowMat = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
    using MapR = Eigen::Map<RowMat>;
    const Eigen::Index k = k_, nv = nv_;
    if (out.size() != out_size_ || x.size() != kTargetSize) return 1;
    double* o = out.data();
    auto at = [&](OutputField f) { return o + offsets_[size_t(f)]; };
    Eigen::Map<VectorXd> Q_sent(at(kQSent), nv), Q(at(kQ), nv);
    MapR LB(at(kLB), k, k + 1);
    Eigen::Map<VectorXd> Jdot_nu(at(kJdotNu), k);
    Eigen::Map<VectorXd> g(at(kG), k + nv);
    MapR M(at(kM), nv, nv);
    Eigen::Map<VectorXd> h(at(kH), nv);
    Eigen::Map<VectorXd> z(at(kZ), 6 + 2 * k);
    MapR J(at(kJ), k, nv);

    red_.velocity(nu, v_);
    pinocchio::crba(model, data, q, pinocchio::Convention::WORLD);
    red_.mass(data.M, M);
    J6_.setZero();
    pinocchio::getFrameJacobian(model, data, fid_, pinocchio::LOCAL_WORLD_ALIGNED, J6_);
    for (Eigen::Index i = 0; i < k; ++i) red_.jacobian_row(J6_.row(rows_[size_t(i)]), J.row(i));
    pinocchio::nonLinearEffects(model, data, q, v_);
    red_.force(data.nle, h);
    pinocchio::forwardKinematics(model, data, q, v_, zero_);
    const Eigen::Matrix<double, 6, 1> acc =
        pinocchio::getFrameClassicalAcceleration(model, data, fid_, pinocchio::LOCAL_WORLD_ALIGNED)
            .toVector();
    const pinocchio::SE3& X = pinocchio::updateFramePlacement(model, data, fid_);

    // z = [e₆; ẋ_d − ẋ; ẍ_d − J̇ν]
    Eigen::Map<const Eigen::Matrix<double, 3, 3, Eigen::RowMajor>> R_d(x.data() + kRotation);
    z.head<3>() = x.segment<3>(kPosition) - X.translation();
    if (angular_)
      z.segment<3>(3) = pinocchio::log3(Eigen::Matrix3d(R_d * X.rotation().transpose()));
    else
      z.segment<3>(3).setZero();
    Jnu_.noalias() = J * nu;
    for (Eigen::Index i = 0; i < k; ++i) {
      const int row = rows_[size_t(i)];
      Jdot_nu[i] = acc[row];
      z[6 + i] = x[kVelocity + row] - Jnu_[i];
      z[6 + k + i] = x[kAcceleration + row] - acc[row];
    }
    // g = GG w = [a* − J̇ν; ν̇₀], w = [z; ν; q₀ − q_arm]
    const Eigen::Index nz = 6 + 2 * k;
    w_.head(nz) = z;
    w_.segment(nz, nv) = nu;
    if (posture_) w_.tail(n_arm_) = q0_ - q.tail(n_arm_);
    g.noalias() = GG_ * w_;
    auto ga = g.head(k);
    auto nd0 = g.tail(nv);
    {   // the base plan's wheel terms ν̇_w,plan + K_w ν_w,plan
      const double vp = x[kPlanA] + kw_ * x[kPlanV], wp = x[kPlanAlpha] + kw_ * x[kPlanOmega];
      nd0[0] += (vp + b_ * wp) / r_;
      nd0[1] += (vp - b_ * wp) / r_;
    }
    if (whole_body_) {
      M_nd0_.noalias() = M * nd0;
      rhs_.leftCols(k) = J.transpose();
      rhs_.col(k) = h - M_nd0_;
      llt_.compute(M);
      if (llt_.info() != Eigen::Success) return 2;
      Y_ = rhs_;
      llt_.solveInPlace(Y_);
      JY_.noalias() = J * Y_;
      bvec_ = JY_.col(k) + ga;
      if (!task_solve(LB, bvec_)) return 2;
      Q.noalias() = J.transpose() * LB.col(k);
      Q += M_nd0_;
    } else {
      // nd0 = u = [ν̇_w*; −ν̇₀,a]: h' = h_a + M[2:] u
      const Eigen::Index na = nv - 2;
      rhs_.leftCols(k) = J.rightCols(na).transpose();
      rhs_.col(k).noalias() = M.bottomRows(na) * nd0;
      rhs_.col(k) += h.tail(na);
      llt_.compute(M.bottomRightCorner(na, na));
      if (llt_.info() != Eigen::Success) return 2;
      Y_ = rhs_;
      llt_.solveInPlace(Y_);
      JY_.noalias() = J.rightCols(na) * Y_;
      bvec_ = JY_.col(k) + ga;
      bvec_.noalias() -= J.leftCols(2) * nd0.head(2);
      if (!task_solve(LB, bvec_)) return 2;
      fe_.head(k) = LB.col(k);
      fe_[k] = -1.0;
      nu_dot_.head(2) = nd0.head(2);
      nu_dot_.tail(na).noalias() = Y_ * fe_;
      Q.noalias() = M * nu_dot_;
      Q += h;
    }
    if (friction_) {
      friction_model_.coulomb_viscous(nu, vs_, f_);
      Q += f_;
      if (rolling_) {
        double f0, f1;
        friction_model_.load(model, data, q, true);   // data holds q's placements
        friction_model_.rolling(nu, f0, f1);
        Q[0] += f0;
        Q[1] += f1;
      }
    }
    Q_sent = Q.cwiseMin(limit_).cwiseMax(-limit_);
    return 0;
  }

 private:
  // LB = Λ [I | b] from the mobility JY[:, :k]; false when it is not PD or
  // trace(Λ) ε² > 1 (σ_min not certified above ε: the damped path decides)
  template <class MatLB>
  bool task_solve(MatLB& LB, const VectorXd& b) {
    const Eigen::Index k = k_;
    task_llt_.compute(JY_.leftCols(k));
    if (task_llt_.info() != Eigen::Success) return false;
    LB.leftCols(k) = task_llt_.solve(eye_);
    LB.col(k) = task_llt_.solve(b);
    return !(eps2_ > 0.0 && LB.leftCols(k).trace() * eps2_ > 1.0);
  }

  Reduction red_;
  MatrixXd GG_;
  VectorXd q0_, limit_;
  Friction friction_model_;
  std::vector<int> rows_;
  std::vector<Eigen::Index> offsets_;
  Eigen::Index out_size_ = 0;
  pinocchio::FrameIndex fid_;
  bool whole_body_, angular_, posture_, friction_, rolling_;
  double r_, b_, kw_, vs_, eps2_;
  Eigen::Index k_, nv_, n_arm_;
  MatrixXd J6_, rhs_, Y_, JY_, eye_;
  VectorXd w_, zero_, v_, Jnu_, bvec_, M_nd0_, fe_, nu_dot_, f_;
  Eigen::LLT<MatrixXd> llt_, task_llt_;
};

// The named reduced terms one at a time: the compiled side of
// opspace/dynamics/_terms.py (M_r, h_r, g_r, J_r, J̇ν, friction, rolling
// resistance, static contact loads), for the checks that hold each to its
// NumPy twin; Plant and Controller use the same pieces (Reduction, Friction).
class Terms {
 public:
  Terms(const MatrixXd& S, const FrictionModel& friction)
      : red_(S), friction_(friction),
        loads_(friction.contact_rows, friction.caster_rows, 1.0, 1.0), nv_(S.cols()),
        v_(S.rows()), zero_(VectorXd::Zero(S.rows())), J6_(MatrixXd::Zero(6, S.rows())) {}

  // M_r = Sᵀ M S
  MatrixXd mass(const Model& model, Data& data, CRefV q) {
    pinocchio::crba(model, data, q, pinocchio::Convention::WORLD);
    MatrixXd Mr(nv_, nv_);
    red_.mass(data.M, Mr);
    return Mr;
  }
  // h_r = Sᵀ h(q, S ν) = c + g
  VectorXd bias(const Model& model, Data& data, CRefV q, CRefV nu) {
    red_.velocity(nu, v_);
    pinocchio::nonLinearEffects(model, data, q, v_);
    VectorXd h(nv_);
    red_.force(data.nle, h);
    return h;
  }
  // g_r = Sᵀ g(q)
  VectorXd gravity(const Model& model, Data& data, CRefV q) {
    pinocchio::computeGeneralizedGravity(model, data, q);
    VectorXd g(nv_);
    red_.force(data.g, g);
    return g;
  }
  // J_r (6, nv) of a frame, [linear; angular], world-aligned at the frame origin
  MatrixXd jacobian(const Model& model, Data& data, CRefV q, int fid) {
    pinocchio::crba(model, data, q, pinocchio::Convention::WORLD);   // fills data.J
    J6_.setZero();
    pinocchio::getFrameJacobian(model, data, static_cast<pinocchio::FrameIndex>(fid),
                                pinocchio::LOCAL_WORLD_ALIGNED, J6_);
    MatrixXd J(6, nv_);
    for (Eigen::Index i = 0; i < 6; ++i) red_.jacobian_row(J6_.row(i), J.row(i));
    return J;
  }
  // J̇ν (6,): the frame's classical acceleration at ν̇ = 0
  VectorXd jdot_nu(const Model& model, Data& data, CRefV q, CRefV nu, int fid) {
    red_.velocity(nu, v_);
    pinocchio::forwardKinematics(model, data, q, v_, zero_);
    return pinocchio::getFrameClassicalAcceleration(model, data,
                                                    static_cast<pinocchio::FrameIndex>(fid),
                                                    pinocchio::LOCAL_WORLD_ALIGNED)
        .toVector();
  }
  // f = f_C σ(ν) + f_v ν + f_rr(q, ν), smoothing v_s as in `Friction`
  VectorXd friction(const Model& model, Data& data, CRefV q, CRefV nu, double smoothing) {
    VectorXd f(nv_);
    friction_.coulomb_viscous(nu, smoothing, f);
    if (friction_.has_rolling()) {
      double f0, f1;
      friction_.load(model, data, q);
      friction_.rolling(nu, f0, f1);
      f[0] += f0;
      f[1] += f1;
    }
    return f;
  }
  // f_rr (nv,): the rolling resistance alone
  VectorXd rolling(const Model& model, Data& data, CRefV q, CRefV nu) {
    VectorXd f = VectorXd::Zero(nv_);
    if (friction_.has_rolling()) {
      friction_.load(model, data, q);
      friction_.rolling(nu, f[0], f[1]);
    }
    return f;
  }
  // N (k,): the static contact loads at q
  VectorXd contact_loads(const Model& model, Data& data, CRefV q) {
    loads_.load(model, data, q);
    VectorXd N(loads_.contacts());
    for (Eigen::Index i = 0; i < N.size(); ++i) N[i] = loads_.level(i);
    return N;
  }

 private:
  Reduction red_;
  Friction friction_;
  Rolling loads_;          // with C_rr = r = 1: its levels are the loads
  Eigen::Index nv_;
  VectorXd v_, zero_;
  MatrixXd J6_;
};

// Reduced inverse dynamics without friction: Q = Sᵀ RNEA(q, S ν, S ν̇)
// (`opspace.inverse_dynamics`; one call instead of four NumPy products).
class InverseDynamics {
 public:
  explicit InverseDynamics(const MatrixXd& S) : red_(S), v_(S.rows()), a_(S.rows()) {}

  // false (Q untouched) when an input is not finite: the caller reports it
  bool rnea(const Model& model, Data& data, CRefV q, CRefV nu, CRefV nu_dot, RefV Q) {
    if (!q.allFinite() || !nu.allFinite() || !nu_dot.allFinite()) return false;
    red_.velocity(nu, v_);
    red_.velocity(nu_dot, a_);
    pinocchio::rnea(model, data, q, v_, a_);
    red_.force(data.tau, Q);
    return true;
  }

 private:
  Reduction red_;
  VectorXd v_, a_;
};

// The world placement of frame `fid` at n configurations qs (n * nq, row after
// row): out (n * 12) = [p (3), R (9, row-major)] per configuration.
void frame_placements(const Model& model, Data& data, CRefV qs, int fid, RefV out) {
  const Eigen::Index nq = model.nq, n = qs.size() / nq;
  const auto f = static_cast<pinocchio::FrameIndex>(fid);
  for (Eigen::Index i = 0; i < n; ++i) {
    pinocchio::forwardKinematics(model, data, qs.segment(i * nq, nq));
    const pinocchio::SE3& X = pinocchio::updateFramePlacement(model, data, f);
    out.segment<3>(12 * i) = X.translation();
    for (int r = 0; r < 3; ++r) out.segment<3>(12 * i + 3 + 3 * r) = X.rotation().row(r);
  }
}

}  // namespace

template <class T>
bp::object vector_field(T FrictionModel::*m) {
  return bp::make_getter(m, bp::return_value_policy<bp::return_by_value>());
}

void bind_named() {
  bp::class_<FrictionModel>("FrictionModel")
      .add_property("coulomb", vector_field(&FrictionModel::coulomb),
                    bp::make_setter(&FrictionModel::coulomb))
      .add_property("viscous", vector_field(&FrictionModel::viscous),
                    bp::make_setter(&FrictionModel::viscous))
      .add_property("contact_rows", vector_field(&FrictionModel::contact_rows),
                    bp::make_setter(&FrictionModel::contact_rows))
      .add_property("caster_rows", vector_field(&FrictionModel::caster_rows),
                    bp::make_setter(&FrictionModel::caster_rows))
      .def_readwrite("rolling_resistance", &FrictionModel::rolling_resistance)
      .def_readwrite("wheel_radius", &FrictionModel::wheel_radius);
  bp::class_<ControllerOptions>("ControllerOptions")
      .def_readwrite("frame_id", &ControllerOptions::frame_id)
      .def_readwrite("whole_body", &ControllerOptions::whole_body)
      .def_readwrite("angular", &ControllerOptions::angular)
      .def_readwrite("posture", &ControllerOptions::posture)
      .def_readwrite("friction_feedforward", &ControllerOptions::friction_feedforward)
      .def_readwrite("wheel_radius", &ControllerOptions::wheel_radius)
      .def_readwrite("half_track", &ControllerOptions::half_track)
      .def_readwrite("wheel_gain", &ControllerOptions::wheel_gain)
      .def_readwrite("friction_velocity", &ControllerOptions::friction_velocity)
      .def_readwrite("damping2", &ControllerOptions::damping2);
  bp::class_<Terms>("Terms", bp::init<const MatrixXd&, const FrictionModel&>())
      .def("mass", &Terms::mass)
      .def("bias", &Terms::bias)
      .def("gravity", &Terms::gravity)
      .def("jacobian", &Terms::jacobian)
      .def("jdot_nu", &Terms::jdot_nu)
      .def("friction", &Terms::friction)
      .def("rolling", &Terms::rolling)
      .def("contact_loads", &Terms::contact_loads);
}

BOOST_PYTHON_MODULE(_kernel) {
  eigenpy::enableEigenPy();
  bp::scope().attr("PINOCCHIO_VERSION") = PINOCCHIO_VERSION;
  bp::scope().attr("EIGENPY_VERSION") = EIGENPY_VERSION;
  bp::class_<Plant>("Plant", bp::init<const MatrixXd&, const VectorXd&, const VectorXd&,
                                      const VectorXd&, const VectorXd&, const VectorXd&,
                                      const VectorXd&, const VectorXd&, const VectorXd&,
                                      const MatrixXd&, const MatrixXd&, double, double>())
      .def("rk4", &Plant::rk4)
      .def("euler", &Plant::euler)
      .def("accel", &Plant::accel_only)
      .def("state", &Plant::state);
  bind_named();
  bp::class_<Controller>("Controller",
                         bp::init<const MatrixXd&, const MatrixXd&, const VectorXd&,
                                  const VectorXd&, const VectorXd&, const ControllerOptions&,
                                  const FrictionModel&>())
      .def("command", &Controller::command)
      .def("target_layout", target_layout)
      .staticmethod("target_layout")
      .def("output_layout", output_layout)
      .staticmethod("output_layout");
  bp::def("frame_placements", frame_placements);
  bp::class_<InverseDynamics>("InverseDynamics", bp::init<const MatrixXd&>())
      .def("rnea", &InverseDynamics::rnea);
}
