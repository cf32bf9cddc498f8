#include "retrieval/engines/full_model_lbfgs.h"

#include <cmath>

namespace sw::full_model_detail {

class LbfgsRunner::Adapter : public ceres::FirstOrderFunction {
 public:
  Adapter(const FullModelObjective& f, LbfgsRunner* r) : f_(f), r_(r) {}
  bool Evaluate(const double* x, double* cost, double* grad) const override {
    try {
      *cost = f_.evaluate(x, grad);
      return std::isfinite(*cost);
    } catch (...) {
      if (!r_->error_) r_->error_ = std::current_exception();
      return false;
    }
  }
  int NumParameters() const override { return f_.num_parameters(); }

 private:
  const FullModelObjective& f_;
  LbfgsRunner* r_;
};

void LbfgsRunner::advance(int n) {
  std::unique_lock<std::mutex> lock(mutex_);
  budget_ = done_ + n;
  paused_ = false;
  if (!thread_.joinable()) {
    thread_ = std::thread([this] { run(); });
  } else {
    cv_.notify_all();
  }
  cv_.wait(lock, [this] { return paused_ || finished_; });
}

void LbfgsRunner::stop() {
  {
    std::lock_guard<std::mutex> lock(mutex_);
    stop_ = true;
  }
  cv_.notify_all();
  if (thread_.joinable()) thread_.join();
}

ceres::CallbackReturnType LbfgsRunner::on_iteration(const ceres::IterationSummary& s) {
  std::unique_lock<std::mutex> lock(mutex_);
  cost_ = s.cost;
  step_ = s.step_size;
  if (s.iteration == 0) {
    initial_cost_ = s.cost;
    return stop_ ? ceres::SOLVER_TERMINATE_SUCCESSFULLY : ceres::SOLVER_CONTINUE;
  }
  ++done_;
  if (done_ >= budget_ && !stop_) {
    paused_ = true;
    cv_.notify_all();
    cv_.wait(lock, [this] { return done_ < budget_ || stop_; });
  }
  return stop_ ? ceres::SOLVER_TERMINATE_SUCCESSFULLY : ceres::SOLVER_CONTINUE;
}

void LbfgsRunner::run() {
  try {
    ceres::GradientProblemSolver::Options o = options_;
    o.callbacks.push_back(&callback_);
    o.update_state_every_iteration = true;
    ceres::GradientProblem problem(new Adapter(objective_, this));
    ceres::Solve(o, problem, x_.data(), &summary_);
  } catch (...) {
    if (!error_) error_ = std::current_exception();
  }
  std::lock_guard<std::mutex> lock(mutex_);
  finished_ = true;
  cv_.notify_all();
}

}  // namespace sw::full_model_detail
