package schema

import "strings"

// The names inside a deposit bundle (a BagIt bag, RFC 8493) and the
// RO-Crate identifiers trajvault writes and checks, in one place: pack
// writes them, validate reads them.
const (
	// PayloadDir is the bag's payload folder (RFC 8493 sec. 2.1.2).
	PayloadDir = "data"
	// TrajectoriesDir holds the trajectory files, relative to the bag.
	TrajectoriesDir = PayloadDir + "/trajectories"
	// TrajectoryExt is the file name extension of trajectory files.
	TrajectoryExt = ".h5"

	// CrateFile is the RO-Crate metadata file name and, in the crate, the
	// @id of the metadata descriptor (RO-Crate 1.1, "Root Data Entity").
	CrateFile = "ro-crate-metadata.json"
	// DataCiteFile is the DataCite 4.5 metadata file name.
	DataCiteFile = "datacite.json"

	// CratePath and DataCitePath are where the metadata lie in the bag.
	CratePath    = PayloadDir + "/" + CrateFile
	DataCitePath = PayloadDir + "/" + DataCiteFile

	// CrateRootID is the @id of the root Dataset (RO-Crate 1.1).
	CrateRootID = "./"
	// CrateContext is the JSON-LD @context of an RO-Crate 1.1 crate.
	CrateContext = "https://w3id.org/ro/crate/1.1/context"
	// CrateConformsTo is what the metadata descriptor conforms to.
	CrateConformsTo = "https://w3id.org/ro/crate/1.1"

	// ManifestSHA256 is the bag's SHA-256 payload manifest; the crate's
	// File entities carry the same digests.
	ManifestSHA256 = "manifest-sha256.txt"
)

// PayloadPath is the bag path of a crate @id: crate ids are relative to
// the payload folder, where the crate file lies.
func PayloadPath(crateID string) string { return PayloadDir + "/" + crateID }

// IsTrajectory reports whether a bag path names a trajectory file.
func IsTrajectory(bagPath string) bool { return strings.HasSuffix(bagPath, TrajectoryExt) }
