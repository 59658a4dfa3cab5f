// Package synth generates invented high-density surface EMG studies with a
// known ground truth, for the demo, tests and benchmarks.
//
// The model (a property of this package, not a measurement): each muscle has
// a pool of motor units with excitation thresholds spread exponentially over
// 1-60 % of maximal excitation (more low-threshold units). A unit discharges
// once the excitation reaches its threshold, at a rate that starts at
// 6.3-7.5 pps and rises 0.6 pps per % excitation above threshold up to a
// ceiling that falls from 35 pps (earliest units) to about 19 pps (latest),
// so on a plateau the units recruited earlier fire faster. Intervals carry
// Gaussian jitter (CoV 0.12-0.19). A unit stops 1 % excitation below its
// threshold (derecruitment on the ramp down). Force is the sum of critically
// damped twitches (contraction time 90 ms for the first unit down to 35 ms
// for the last, peak growing 25-fold with threshold); the excitation is the
// steady-state inverse of the trapezoidal target (so force follows the target
// on the ramps too) times a slow common-drive fluctuation of 1 %, and each
// trial's force is finally scaled by one factor so that its plateau mean is
// the target (the factor is in the truth, close to 1). MUAPs are triphasic
// waves propagating from a unit-specific innervation point along the fibres
// (grid rows), falling off across them; EMG is the sum of the MUAP trains
// plus Gaussian noise at the configured plateau SNR, in uV, quantised to
// 0.01 uV.
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
