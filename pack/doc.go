// Package pack turns folders of legacy text logs into trajectory files in
// the trajvault layout: generic readers (XYZ, extended XYZ, column tables,
// recipe-described line logs) that stream one record at a time and report
// bad input with file, line and column; Discover, which finds the
// trajectories of an ensemble; Scan, a first pass that records printed
// precision, restarts and problems; Convert, a second pass that writes
// numbers exactly at their printed precision; and Export, back to text.
//
// The deposit bundle (provenance, BagIt, RO-Crate, DataCite) is not built
// yet.
package pack
