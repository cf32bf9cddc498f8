#pragma once
// Internal to the full-model engine (full_model_engine.cpp): a pausable L-BFGS run of
// FullModelObjective.

#include <condition_variable>
#include <exception>
#include <mutex>
#include <thread>
#include <vector>

#include <ceres/ceres.h>

#include "retrieval/engines/full_model_engine.h"

namespace sw::full_model_detail {

// Ceres' GradientProblemSolver on a worker thread; an iteration callback pauses it after
// every `budget` iterations until advance() grants more, so one L-BFGS run (with its curvature
// memory) spans many engine iterations. The parameters are read only while the solver waits.
class LbfgsRunner {
 public:
  LbfgsRunner(const FullModelObjective& f, const ceres::GradientProblemSolver::Options& o,
              std::vector<double> x0)
      : objective_(f), options_(o), x_(std::move(x0)), callback_(this) {}
  ~LbfgsRunner() { stop(); }
  LbfgsRunner(const LbfgsRunner&) = delete;
  LbfgsRunner& operator=(const LbfgsRunner&) = delete;

  /// Runs `n` more iterations (starting the solver on the first call); returns when it has
  /// paused or finished.
  void advance(int n);
  /// Ends the run (the solver returns at its next callback) and joins the thread.
  void stop();
  bool finished() const {
    std::lock_guard<std::mutex> lock(mutex_);
    return finished_;
  }
  const std::vector<double>& x() const { return x_; }
  const ceres::GradientProblemSolver::Summary& summary() const { return summary_; }
  int iterations() const { return done_; }
  double initial_cost() const { return initial_cost_; }
  double cost() const { return cost_; }
  double step_size() const { return step_; }
  std::exception_ptr error() const { return error_; }

 private:
  class Adapter;  // the objective as a ceres::FirstOrderFunction (full_model_lbfgs.cpp)
  class Callback : public ceres::IterationCallback {
   public:
    explicit Callback(LbfgsRunner* r) : r_(r) {}
    ceres::CallbackReturnType operator()(const ceres::IterationSummary& s) override {
      return r_->on_iteration(s);
    }

   private:
    LbfgsRunner* r_;
  };

  ceres::CallbackReturnType on_iteration(const ceres::IterationSummary& s);
  void run();

  const FullModelObjective& objective_;
  ceres::GradientProblemSolver::Options options_;
  std::vector<double> x_;
  Callback callback_;
  ceres::GradientProblemSolver::Summary summary_;
  std::thread thread_;
  mutable std::mutex mutex_;
  std::condition_variable cv_;
  int budget_ = 0, done_ = 0;
  bool paused_ = false, finished_ = false, stop_ = false;
  double initial_cost_ = 0.0, cost_ = 0.0, step_ = 0.0;
  std::exception_ptr error_;
};

}  // namespace sw::full_model_detail
