// Package calibrate fits a simulator's physical parameters to logged runs
// and says how well the logs determine them.
//
// The pieces, in the order data flows through them:
//
//   - LogReader reads a log: a CSV file with a header row whose time column
//     is t (seconds, strictly increasing, any sample rate) and whose other
//     columns are named as in run files (sim.StateHeader: "carton.x",
//     "elbow.q", ...). A ColumnMap renames columns and converts units for
//     logs written by other tools. Empty and NaN cells are missing data.
//   - FitFile is the YAML description of one fit: scene, training and
//     held-out logs, free parameters with bounds, initial values and
//     priors, window length, noise, smoothing schedule and limits.
//   - Fit cuts every log into windows (multiple shooting), simulates each
//     window from the logged state at its start and compares the simulated
//     frames with the logged ones at the log's own times. It minimizes the
//     weighted sum of squared residuals with LeastSquares, a bounded
//     Levenberg–Marquardt method whose Jacobians come from sim.Sample.
//   - Uncertainty turns the Jacobian at the optimum into standard errors,
//     95 % intervals, correlations and plain-language identifiability.
//   - Report writes the result as JSON, HTML and PNG plots.
//   - Tuner, after a fit, tunes controller gains (TuneProblem, TuneFile) by
//     projected gradient descent on a task cost averaged over parameter
//     samples drawn from the fit's covariance, with exact gradients from
//     sim.Trace; its results carry the safety caution SafetyCaution.
//
// Conventions, stated once:
//
//   - SI units throughout (m, kg, s, N, rad); a ColumnMap converts degrees
//     and millimetres on reading.
//   - Residuals are whitened: each is (simulated − logged)/σ with σ the
//     channel's noise standard deviation, so a perfect model leaves
//     residuals of unit variance.
//   - An orientation residual is the world rotation vector φ that carries
//     the logged orientation onto the simulated one; its length is the
//     geodesic angle 2·acos(|q₁·q₂|), so its three components contribute
//     exactly the squared geodesic angle to the loss while staying smooth
//     where the angle is zero.
//   - The loss is ½‖r‖², r the whitened residual vector including one row
//     (θ − μ)/σ per Gaussian prior.
//   - Results do not depend on the number of cores: windows are evaluated
//     concurrently but each one's rows are written to a fixed place and
//     every sum runs in a fixed order.
//
// Nothing in this package prints; progress goes to callbacks.
package calibrate
