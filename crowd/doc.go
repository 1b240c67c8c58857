// Package crowd turns many redundant, noisy crowd labels into one consensus per
// item, with a posterior over the classes, and a reliability figure per
// annotator. It holds the cleaning rules (Clean), the combining methods
// (Majority, DawidSkene, OneCoin, Hierarchical, and Auto, which chooses
// among them by held-out label likelihood), the correction of a bias every annotator
// shares (Debias), the agreement statistics (CohenKappa, FleissKappa,
// KrippendorffAlpha, Agree) and the list of items that still need labels
// (Uncertain).
//
// The package takes and returns plain Go values. Labels are held in a compact
// column form (Labels) indexed by small integers so that tens of millions of
// labels fit in memory; Build maps the string ids of handoff.Label to those
// indices and Index maps them back.
//
// Written by hand, and why: Dawid–Skene EM, one-coin EM, the kappas and
// Krippendorff's alpha have no maintained Go implementation (gonum has
// none), and the EM kernel must be cache-blocked and parallel to handle tens
// of millions of labels (see em.go); quantiles and matrices come from gonum.
//
// Size: the package is over 1,500 lines because its combining models share
// one cache-blocked, parallel EM kernel (em.go, with its amd64 sweeps) that
// each model plugs an M-step into; splitting them into packages would export
// the kernel's internals. Cleaning, agreement and debiasing are separate files
// that only share the Labels type.
//
// Conventions: class, item and annotator indices are 0-based; a gold slice
// has one entry per item holding the expert class or -1 (nil means no gold);
// posteriors are stored row-major, NItems×NClasses; confusion matrices are
// indexed [true class][given class]. No function returns NaN: a figure that is
// undefined for the data (a kappa when every label is one class, say) is an
// error that says why.
package crowd
