// Package provenance records how a deposit was made: method and settings,
// the code version, the constant set used for unit conversions (CODATA
// 2018) and a checksum of every source file.
//
// Status: planned with the deposit bundle; nothing is implemented yet.
package provenance
