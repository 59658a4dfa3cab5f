// Package deid helps make muarc recordings safe to share: it applies a
// de-identification policy to a record.Recording (keep, drop, keyed
// pseudonyms, per-subject date shifts, reduction to the year, age bands,
// scrubbed free text), writes the result as a fresh file, and proves by a
// scan of the output's raw bytes that no original identifying value is left.
//
// The built-in policy follows the HIPAA Safe Harbor list of 18 identifier
// kinds (45 CFR 164.514(b)(2)). Fields a policy does not name are dropped:
// the policy is an allow-list. See POLICY.md in this folder.
//
// muarc helps de-identify; it does not certify. The ethics board, the
// consent the participants gave and local data-protection law decide what
// may be shared. A face photograph, a voice recording or a rare diagnosis in
// any attachment can identify a person too.
package deid
