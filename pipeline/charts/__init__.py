"""Control charts: Shewhart, CUSUM and EWMA statistics, run rules, run-length design, baselines and signals."""
