// Constants shared by the loss, metric and posterior code, each written once so that every file
// computes with the same bits. Units: natural logarithms.
#pragma once

namespace chorus {

inline constexpr double kLogTwoPi = 1.8378770664093453;         // ln(2 pi)
inline constexpr double kLogSqrtTwoPi = 0.91893853320467274178;  // ln sqrt(2 pi)

// The smallest probability a log-score takes the log of: ln(1e-300) = -690.8, so a confident
// wrong prediction costs a large but finite NLL instead of infinity.
inline constexpr double kProbabilityFloor = 1e-300;

}  // namespace chorus
