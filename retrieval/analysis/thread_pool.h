#pragma once
// Independent tasks on worker threads, for retrieve()'s bootstrap replicas (and any other loop
// whose iterations share nothing but read-only inputs).
//
// parallel_for(n, threads, task) calls task(0) ... task(n - 1), each exactly once, on
// min(threads, n) workers (the calling thread and new std::threads) that take the next index in
// turn. Determinism: a task must write
// only its own slot of a result indexed by i, and draw its random numbers from a seed derived
// from i, never from a shared generator; then the results do not depend on the thread count or
// on the order in which the tasks finish. OpenMP regions inside a task run single-threaded
// (each worker sets omp_set_num_threads(1); the caller's own setting is restored at the end), so
// the answer of a task is also the same for any thread count.
//
// Errors: the exception of the lowest failed index is rethrown on the calling thread after
// every worker has stopped; once a task has failed no new task starts (running ones finish).

#include <functional>

namespace sw {

/// Worker threads for a request: `requested` when >= 1, else (0) the machine's hardware threads
/// (std::thread::hardware_concurrency(), 1 when unknown).
int resolve_threads(int requested);

/// Runs task(i) for i in [0, n) on min(threads, n) worker threads (threads >= 1; n <= 0 does
/// nothing). See the header comment for determinism and errors.
void parallel_for(int n, int threads, const std::function<void(int)>& task);

}  // namespace sw
