// Package causal diagnoses positivity (overlap, common support) for an
// observational comparison of a treated and a control arm, and estimates the
// effect where the data support it.
//
// A Study names the data and the roles (treatment, outcome, covariates); from
// it come propensity Scores, and from those every other result: Support,
// Cells, BalanceSheet, Weights, Trimmed, Estimates and Effect, Bootstrap,
// Verdict, and the whole Report.
//
// # Errors travel with the results
//
// The calls chain: each step returns a result, never an (x, error) pair, so
//
//	causal.Load("audits.csv").Treat("audit").TreatedLevel("yes").
//		Outcome("litres_per_day").Adjust("lot_m2", "district").
//		Propensity().Effects(causal.ATE)
//
// is one expression. A step that fails keeps its error inside the value it
// returns, and every later step built on it carries that same error (the
// original, not a new one that says "input failed"). The leaves return it:
//
//   - Err() on every result gives the error (nil when it worked);
//   - String() and the widgets' HTML show it as the result's text and panel;
//   - MarshalJSON encodes it as {"status": "failed", "error": "..."}, so a
//     failed result never encodes as an empty object;
//   - Estimates.Get never returns nil: from failed Estimates it returns an
//     Effect carrying their error.
//
// Check Err() before reading a result's fields: the numeric fields of a failed
// result are NaN or zero. Nothing in the package panics on bad input; a data
// or option problem is an error that names the column, row or setting to fix.
// An error whose fix is a Study setting is a *SettingError, which front ends
// rephrase in their own terms (RephraseSettings).
//
// Diagnostics cannot verify unconfoundedness, and every estimate depends on
// the covariates measured; see Cautions.
package causal
