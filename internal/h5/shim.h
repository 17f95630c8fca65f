// shim.h: the small C layer trajvault needs beyond gonum.org/v1/hdf5.
// Every function returns a negative value on failure; no function prints,
// because tv_init switches the HDF5 error stack printing off.
#ifndef TRAJVAULT_SHIM_H
#define TRAJVAULT_SHIM_H

#include <stdlib.h>
#include <hdf5.h>
#include <hdf5_hl.h>

#define TV_MAXRANK 8

enum { TV_T_F64 = 1, TV_T_F32, TV_T_I64, TV_T_I32, TV_T_I16, TV_T_I8, TV_T_U8, TV_T_U32, TV_T_U64 };
enum { TV_CLS_OTHER = 0, TV_CLS_INT, TV_CLS_FLOAT, TV_CLS_STRING, TV_CLS_ENUM, TV_CLS_COMPOUND, TV_CLS_REFERENCE };
enum { TV_KIND_MISSING = 0, TV_KIND_GROUP, TV_KIND_DATASET, TV_KIND_DATATYPE, TV_KIND_SOFT, TV_KIND_EXTERNAL, TV_KIND_OTHER };

typedef struct {
	int cls;         // TV_CLS_*
	size_t size;     // bytes per element (string: fixed length)
	int is_signed;   // integers
	int is_vlen;     // variable-length string
	int rank;        // -1 null dataspace, 0 scalar
	hsize_t dims[TV_MAXRANK];
	hsize_t maxdims[TV_MAXRANK];
} tv_info;

typedef struct {
	int layout;      // 0 compact, 1 contiguous, 2 chunked, -1 other
	hsize_t chunk[TV_MAXRANK];
	int nfilters;
	unsigned long long storage; // bytes on disk
} tv_storage;

typedef struct {
	int shuffle;
	int deflate;            // -1: off, else level 0..9
	int scaleoffset;        // -1: off, 0: float D-scale, 1: integer
	int scaleoffset_factor; // decimal digits (float) or min bits (int, 0 = auto)
	int nbit;
	int fletcher32;
} tv_filters;

void tv_init(void);
void tv_quiet(void);
hid_t tv_memtype(int code);
hid_t tv_filetype(int code);
long tv_obj_count(void);

int tv_kind(hid_t loc, const char *path);
long tv_nlinks(hid_t loc, const char *path);
char *tv_link_name(hid_t loc, const char *path, hsize_t idx);
int tv_object_id(hid_t loc, const char *path, unsigned long *fileno, unsigned char tok[16]);
int tv_hardlink(hid_t loc, const char *src, const char *dst);
int tv_softlink(hid_t loc, const char *target, const char *dst);

long tv_nattrs(hid_t loc, const char *path);
char *tv_attr_name(hid_t loc, const char *path, hsize_t idx);
int tv_attr_info(hid_t loc, const char *path, const char *name, tv_info *out);
int tv_attr_read(hid_t loc, const char *path, const char *name, int memcode, void *buf);
char *tv_attr_read_strings(hid_t loc, const char *path, const char *name, size_t *total);
int tv_attr_write(hid_t loc, const char *path, const char *name, int filecode, int memcode,
                  int rank, const hsize_t *dims, const void *buf);
int tv_attr_write_strings(hid_t loc, const char *path, const char *name, const char *packed,
                          int n, int rank, int vlen);

hid_t tv_dset_create(hid_t loc, const char *path, int filecode, int rank, const hsize_t *dims,
                     const hsize_t *maxdims, const hsize_t *chunk, const tv_filters *f);
hid_t tv_dset_create_strings(hid_t loc, const char *path, const char *packed, int n, int vlen);
hid_t tv_dset_open(hid_t loc, const char *path);
int tv_dset_close(hid_t d);
int tv_dset_append(hid_t d, int memcode, hsize_t rows, const void *buf);
int tv_dset_write(hid_t d, int memcode, const void *buf);
int tv_dset_info(hid_t loc, const char *path, tv_info *t, tv_storage *s);
int tv_dset_filter(hid_t loc, const char *path, int idx, unsigned *id, char *name, size_t namelen,
                   unsigned *cd, size_t *ncd);
int tv_dset_read(hid_t loc, const char *path, int memcode, int rank, const hsize_t *start,
                 const hsize_t *count, void *buf);
char *tv_dset_read_strings(hid_t loc, const char *path, size_t *total);

int tv_delete_link(hid_t loc, const char *path);
int tv_delete_attr(hid_t loc, const char *path, const char *name);

hid_t tv_create(const char *path, int libver_low, int istore_k);
int tv_close_file(hid_t f);
int tv_group_create(hid_t loc, const char *path);

hid_t tv_open_image(void *buf, size_t size);

#endif
