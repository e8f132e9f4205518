// Package widgets turns counterpart's results (package causal) into what a
// reader sees: a one-sentence headline, interactive ECharts charts built with
// go-echarts (each with a static picture drawn by gonum/plot for readers
// without scripts), and HTML tables. It knows nothing of Jupyter: package
// kernel puts these views into notebook cells, and the report command puts
// them into a self-contained page (ReportPage).
//
// # Views
//
// View(x) is the entry point. For every causal result type it returns a
// Viewer with two faces built from the same result:
//
//	v := widgets.View(scores.Support())
//	v.HTML()   // headline, charts and tables for a notebook or a page
//	v.String() // the headline and the result's own terminal text
//
// A result whose Err() is not nil is shown as an error panel that names what
// to fix (ErrorPanel, ErrorText). The JSON face of a result is the result's
// own MarshalJSON, in package causal.
//
// # Charts
//
// Each chart constructor (SupportHistogram, CellsHeatmap, BalanceDots, ...)
// returns a Chart: the ECharts option as plain JSON, the client script that
// draws it into an element with a unique id, and the static fallback. Chart
// data is binned or summarised in Go so that a chart's payload stays bounded
// whatever the number of rows. ECharts itself is not embedded per chart:
// LibraryScript wraps a pinned build so that it loads with or without
// RequireJS, and Page assembles a standalone page around views.
//
// # Ad-hoc results
//
// Rows a user computes in a loop (a simulation over a grid) become a Sheet,
// from a slice of structs (Series) or named slices (Columns). A Sheet shows
// as a table with a CSV download (its HTML, String and MarshalJSON), and
// Line and Scatter draw its columns as a Chart built like the others:
//
//	rows := widgets.Series(results) // fields named by their json tags
//	kernel.Show(rows.Line("dims", "cells_with_both_arms", "true_overlap"), rows)
//
// # Safety
//
// Every string that comes from the data (column names, levels, messages
// quoting values) reaches HTML through html/template and reaches scripts
// through ScriptJSON, which escapes <, > and &; tests feed hostile labels
// through every view.
package widgets
