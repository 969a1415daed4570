"""Pure physics: constants and interference-pattern formulas, SI units throughout."""
