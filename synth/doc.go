// Package synth generates invented high-density surface EMG studies with a
// known ground truth, for the demo, tests and benchmarks.
//
// The model (a property of this package, not a measurement): each muscle has
// a pool of motor units with excitation thresholds spread exponentially over
// 1.5-60 % of maximal excitation (more low-threshold units). A unit
// discharges once the excitation reaches its threshold, at a rate that
// starts at 6.4-7.2 pps and rises about 0.6 pps per % excitation above
// threshold up to a ceiling that falls from 35 pps (earliest units) to about
// 19 pps (latest), so on a plateau the units recruited earlier fire faster.
// Intervals carry Gaussian jitter (CoV 0.12-0.19, clipped at 2.5 SD). A
// unit stops below 0.88 x threshold - 0.5 % (derecruitment on the ramp
// down), slowing to at most 1.5 pps under its initial rate on the way.
//
// Force is the sum of critically damped twitches peak (t/tc) exp(1 - t/tc),
// contraction time tc from about 90 ms (first unit) to 35 ms (last), peak
// growing 12-fold with threshold, over the pools of all arrays. The
// excitation is the steady-state inverse of the trapezoidal target, taken
// ahead by the mean twitch delay plus 50 ms (so force follows the target on
// the ramps too), times a slow common-drive fluctuation (1 % SD, 1.5 Hz
// low-pass). Each trial's summed twitches are then scaled by one factor so
// that the plateau mean force is the target (Truth ForceScale, close to 1),
// plus force-sensor noise of 0.05 % MVC. Recruitment thresholds measured as
// the force at the first discharge therefore sit below the steady-state
// ones in Truth, and derecruitment above, by the force lag on fast ramps.
//
// MUAPs are triphasic waves starting at a unit-specific innervation point
// and propagating along the fibres (grid rows) at 3.8-5 m/s, falling off
// across them (Gaussian, 10-18 mm) and along them, widening with distance;
// the template window is 29 ms (6 ms before to 23 ms after the discharge).
// EMG is the sum of the MUAP trains plus Gaussian noise at the configured
// plateau SNR, in uV, quantised to 0.01 uV. A configured bad channel has
// five times the noise and is marked not usable.
//
// Decompositions: "auto" holds, for every array, the units whose threshold
// is at least 7 % excitation below the plateau excitation and that discharge
// at least 10 times (units recruited just under the plateau are "not
// found"), with a few missed and spurious discharges when
// Config.DetectionErrors is set; "edited" (Config.EditedDecomposition, first
// array) has the true trains and drops the lowest-SIL unit. Their figures
// are computed from their own discharges and the force (EXPORTS.md).
//
// EMG is never held in memory: Array.Samples is a streaming
// record.SampleSource that computes any block of rows from the discharges
// and templates, with noise from a counter-based generator, so its values do
// not depend on how a reader splits its blocks. BenchSource gives such a
// source for benchmarks.
//
// Every random choice comes from math/rand/v2 PCG generators with seeds
// derived from Config.Seed; the package uses no clock and no global
// generator. The people, institute and contact details are invented
// (phone numbers in the 555-01xx range, e-mail at example.org, RFC 2606).
//
// WriteExports writes the plain-text files a lab would hold; EXPORTS.md
// describes them.
package synth
