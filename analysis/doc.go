// Package analysis derives the per-unit figures the field reads off a
// motor-unit decomposition — instantaneous and smoothed discharge rates,
// recruitment and derecruitment thresholds, the initial rate at recruitment,
// plateau mean rate and ISI coefficient of variation, the regression of rates
// on recruitment threshold — and motor unit action potential (MUAP) templates
// by spike-triggered averaging of the raw EMG. It also compares two
// decompositions of one recording by the rate of agreement.
//
// All functions work on muarc/record values; nothing here reads or writes
// files. Times are seconds from the trial start, rates pulses per second
// (pps), thresholds % MVC or the force trace's own unit.
//
// Time mapping: a force (or target) sample i lies at Signal.StartS +
// i/Signal.SamplingRateHz; a discharge at sample index d of an array lies at
// Array.StartS + d/Array.SamplingRateHz. Force values between samples are
// interpolated linearly; a discharge outside the force trace gets NaN (never
// the nearest end value).
package analysis
