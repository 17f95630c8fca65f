// Package provenance records how a trajectory file was made: the tool and
// its version, the command line, when, the SHA-256 of every source file,
// the recipe used (embedded), what was dropped and why, how each quantity
// is stored, and the constant set behind unit conversions. The record is
// stored as JSON in each file (/parameters@trajvault_provenance) so that
// anyone can verify, years later, which logs a file came from.
package provenance
