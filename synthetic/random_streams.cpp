#include "synthetic/random_streams.h"

namespace sw::synthetic {

RandomStreams::RandomStreams(unsigned long long seed) : seed_(seed) {
  std::mt19937_64 master(seed);
  for (auto& e : engines_) e.seed(master());
}

}  // namespace sw::synthetic
