// shim.h: trajvault's C layer over the HDF5 library. Every function
// returns a negative value (or NULL) on failure; no function prints,
// because tv_quiet switches HDF5's error printing off. Built against the
// HDF5 1.10, 1.12 and 1.14 APIs (see the TV_HDF5_* guards in shim.c).
#ifndef TRAJVAULT_SHIM_H
#define TRAJVAULT_SHIM_H

#include <stdlib.h>
#include <hdf5.h>

#define TV_MAXRANK 8

enum { TV_T_F64 = 1, TV_T_F32, TV_T_I64, TV_T_I32, TV_T_I16, TV_T_I8, TV_T_U8, TV_T_U32, TV_T_U64 };
enum { TV_CLS_OTHER = 0, TV_CLS_INT, TV_CLS_FLOAT, TV_CLS_STRING, TV_CLS_ENUM, TV_CLS_COMPOUND, TV_CLS_REFERENCE };
enum { TV_KIND_MISSING = 0, TV_KIND_GROUP, TV_KIND_DATASET, TV_KIND_DATATYPE, TV_KIND_SOFT, TV_KIND_EXTERNAL, TV_KIND_OTHER };

// Failure codes beyond -1 (an HDF5 call failed; its stack is kept).
enum {
	TV_E_HDF5 = -1,
	TV_E_EXTERNAL = -2, // data outside the file refused; ctx->refused says what
	TV_E_SIZE = -3,     // selection does not fit the caller's buffer
	TV_E_TYPE = -4,     // datatype unfit to read (size, fields, class)
	TV_E_NOMEM = -5,    // malloc/calloc failed
	TV_E_RANK = -6,     // rank above TV_MAXRANK
};

// What was refused: kinds of outside data.
enum { TV_EXT_NONE = 0, TV_EXT_LINK, TV_EXT_STORAGE, TV_EXT_VIRTUAL };

// tv_ctx is one open file's access policy: property lists whose
// external-link callback enforces it, and the last refusal.
typedef struct {
	hid_t lapl;       // link access (also used for attributes and groups)
	hid_t dapl;       // dataset access: same callback, confined prefixes
	char *dir;        // realpath of the allowed folder, or NULL: refuse all
	int refused;      // TV_EXT_* of the last refusal
	char target[1024]; // its target, truncated
	char reason[128];
} tv_ctx;

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
	int layout;      // 0 compact, 1 contiguous, 2 chunked, 3 virtual, -1 other
	hsize_t chunk[TV_MAXRANK];
	int nfilters;
	int nexternal;   // external raw-data files
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
void tv_err_reset(void);
char *tv_err_take(size_t *len);
hid_t tv_memtype(int code);
hid_t tv_filetype(int code);
long tv_obj_count(void);
int tv_libversion(unsigned *maj, unsigned *min, unsigned *rel);

tv_ctx *tv_ctx_new(const char *dir);
void tv_ctx_free(tv_ctx *c);

hid_t tv_open(tv_ctx *c, const char *path, int rw);
hid_t tv_open_image(const void *buf, size_t size);
hid_t tv_create(const char *path, int libver_low, int istore_k);
int tv_close_file(hid_t f);

int tv_kind(tv_ctx *c, hid_t loc, const char *path);
char *tv_link_names(tv_ctx *c, hid_t loc, const char *path, long *n, size_t *total);
int tv_object_id(tv_ctx *c, hid_t loc, const char *path, unsigned long *fileno, unsigned char tok[16]);
int tv_hardlink(tv_ctx *c, hid_t loc, const char *src, const char *dst);
int tv_softlink(tv_ctx *c, hid_t loc, const char *target, const char *dst);
int tv_group_create(tv_ctx *c, hid_t loc, const char *path);

char *tv_attr_names(tv_ctx *c, hid_t loc, const char *path, long *n, size_t *total);
int tv_attr_info(tv_ctx *c, hid_t loc, const char *path, const char *name, tv_info *out);
int tv_attr_read(tv_ctx *c, hid_t loc, const char *path, const char *name, int memcode, void *buf, size_t buflen);
char *tv_attr_read_strings(tv_ctx *c, hid_t loc, const char *path, const char *name, size_t cap, size_t *total, int *rc);
int tv_attr_write(tv_ctx *c, hid_t loc, const char *path, const char *name, int filecode, int memcode,
                  int rank, const hsize_t *dims, const void *buf);
int tv_attr_write_strings(tv_ctx *c, hid_t loc, const char *path, const char *name, const char *packed,
                          int n, int rank, int vlen);

hid_t tv_dset_create(tv_ctx *c, hid_t loc, const char *path, int filecode, int rank, const hsize_t *dims,
                     const hsize_t *maxdims, const hsize_t *chunk, const tv_filters *f);
hid_t tv_dset_create_strings(tv_ctx *c, hid_t loc, const char *path, const char *packed, int n, int vlen);
int tv_dset_close(hid_t d);
int tv_dset_append(hid_t d, int memcode, hsize_t rows, const void *buf, size_t buflen);
int tv_dset_write(hid_t d, int memcode, const void *buf, size_t buflen);
int tv_dset_info(tv_ctx *c, hid_t loc, const char *path, tv_info *t, tv_storage *s, int want_storage);
int tv_dset_filter(tv_ctx *c, hid_t loc, const char *path, int idx, unsigned *id, char *name, size_t namelen,
                   unsigned *cd, size_t *ncd);
hid_t tv_dset_open_checked(tv_ctx *c, hid_t loc, const char *path, tv_info *t, int *rc);
int tv_dset_read_block(hid_t d, int memcode, int rank, const hsize_t *start, const hsize_t *count,
                       void *buf, size_t buflen);
char *tv_dset_read_strings(tv_ctx *c, hid_t loc, const char *path, size_t cap, size_t *total, int *rc);

int tv_dset_pipeline_filter(hid_t d, int idx, unsigned *id, unsigned *flags, unsigned *cd, size_t *ncd);
void tv_pow10(int d, double *up, double *down);
int tv_dset_set_rows(hid_t d, hsize_t rows);
int tv_dset_write_box(hid_t d, int memcode, int rank, const hsize_t *start, const hsize_t *count,
                      const void *buf, size_t buflen);
int tv_dset_write_chunk(hid_t d, const hsize_t *offset, const void *buf, size_t len);
int tv_dset_read_chunk(hid_t d, const hsize_t *offset, unsigned *mask, void *buf, size_t cap, size_t *len);

int tv_delete_link(tv_ctx *c, hid_t loc, const char *path);
int tv_delete_attr(tv_ctx *c, hid_t loc, const char *path, const char *name);

#endif
