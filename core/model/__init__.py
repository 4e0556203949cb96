"""From a spec and a table to a fitted model: spec, transforms, design, least squares, covariance."""
