"""The 2-D harness: flows given by streamfunctions, fields, the cases `verify --dims 2`
runs through a split sweep, their findings, report and figures."""
