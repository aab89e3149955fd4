// Package adjust adjusts leveling observations: a proportional adjustment of
// a run between held marks, and the weighted least-squares adjustment of a
// network of sections with its statistics (variance factor and its χ² test,
// standardized residuals, Baarda's data snooping).
package adjust
