// Package synth generates invented high-density surface EMG studies with a
// known ground truth, for the demo, tests and benchmarks.
//
// The model (a property of this package, not a measurement): each muscle has
// a pool of motor units whose recruitment thresholds (the steady-state force
// at which they start) are spread exponentially from 2 % MVC to the
// muscle's highest threshold (Site.MaxThresholdPctMVC; 75, 60 and 55 % MVC
// in the demo, within the 50-80 % common for limb muscles), more
// low-threshold units than high ones. The excitation at which each unit
// starts is found from these by inverting the steady-state force (a fixed
// point, as the force depends on the thresholds). A unit discharges once the
// excitation reaches its threshold, at a rate that starts at 6-8 pps and
// rises about 0.8 pps per % excitation above threshold up to a ceiling that
// falls from 35 pps (earliest units) to about 19 pps (latest), so on a
// plateau the units recruited earlier fire faster. Intervals carry Gaussian
// jitter (CoV 0.12-0.19, clipped at 2.5 SD). A unit stops where the
// steady-state force falls below max(0.4 x, 0.75 x its threshold - 1.5 %
// MVC) (derecruitment below recruitment), slowing to at most 1.5 pps under
// its initial rate on the way.
//
// Force is the sum of critically damped twitches peak (t/tc) exp(1 - t/tc),
// contraction time tc from about 90 ms (first unit) to 35 ms (last), peak
// growing 12-fold with threshold, over the pools of all arrays, plus the
// force of the units no grid sees (75 % of the maximal force, growing in
// proportion to the excitation one twitch delay late). The excitation is the
// steady-state inverse of the trapezoidal target, taken ahead by the mean
// twitch delay plus 50 ms (so force follows the target on the ramps too),
// times a slow common-drive fluctuation (1 % SD, 1.5 Hz low-pass). Each
// trial's force is then scaled by one factor so that the plateau mean force
// is the target (Truth ForceScale, close to 1), plus force-sensor noise of
// 0.05 % MVC. Recruitment thresholds measured as the force at the first
// discharge therefore sit below the steady-state ones in Truth, and
// derecruitment above, by the force lag (about 0.1-0.2 s of ramp): small on
// the demo's slow ramps (5 s, 2-10 % MVC/s), larger on fast ones.
//
// MUAPs are triphasic waves starting at a unit-specific innervation point
// and propagating along the fibres (grid rows) at 3.8-5 m/s, falling off
// across them (Gaussian, 10-18 mm) and along them, widening with distance;
// the template window is 29 ms (6 ms before to 23 ms after the discharge).
// EMG is the sum of the MUAP trains plus Gaussian noise at the configured
// plateau SNR, in uV, quantised to 0.01 uV. A configured bad channel has
// five times the noise and is marked not usable.
//
// Decompositions: "auto" holds, for every array, the units whose
// recruitment threshold is at most 88 % of the target and that discharge at
// least 10 times (units recruited just under the plateau are "not
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
