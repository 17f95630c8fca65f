// shim.c: see shim.h. Each function closes every identifier it opens, on
// every path; the Go leak test counts open identifiers after each call.
// Closing calls are HDF5 API calls that clear the error stack, so a
// failing function keeps the stack (keep_err) before it cleans up.
#include <errno.h>
#include <limits.h>
#include <malloc.h>
#include <math.h>
#include <stdint.h>
#include <string.h>
#include <sys/stat.h>
#include "shim.h"

// API generations. 1.12 replaced object addresses by tokens
// (H5O_info2_t, H5Oget_info_by_name3, H5L_info2_t, H5Literate_by_name2)
// and H5Dvlen_reclaim by H5Treclaim; 1.14 keeps the 1.12 calls. The
// versioned names are called directly so the code does not depend on
// the compatibility macros (H5_USE_110_API and friends).
#if H5_VERSION_GE(1, 12, 0)
#define TV_HDF5_TOKENS 1
#else
#define TV_HDF5_TOKENS 0
#endif
#if !H5_VERSION_GE(1, 10, 3)
#error "trajvault needs HDF5 1.10.3 or later (H5Oget_info_by_name2)"
#endif

#if TV_HDF5_TOKENS
typedef H5O_info2_t tv_oinfo;
#define tv_oget_by_name(loc, path, oi, fields, lapl) H5Oget_info_by_name3(loc, path, oi, fields, lapl)
typedef H5L_info2_t tv_linfo;
#define tv_lget_info(loc, path, li, lapl) H5Lget_info2(loc, path, li, lapl)
#define tv_literate_by_name H5Literate_by_name2
#define tv_reclaim(t, s, p, b) H5Treclaim(t, s, p, b)
#else
typedef H5O_info_t tv_oinfo;
#define tv_oget_by_name(loc, path, oi, fields, lapl) H5Oget_info_by_name2(loc, path, oi, fields, lapl)
typedef H5L_info_t tv_linfo;
#define tv_lget_info(loc, path, li, lapl) H5Lget_info(loc, path, li, lapl)
#define tv_literate_by_name H5Literate_by_name
#define tv_reclaim(t, s, p, b) H5Dvlen_reclaim(t, s, p, b)
#endif

// ---- errors ----------------------------------------------------------

// saved is the first failure's error stack of the current shim call (the
// caller holds the package mutex, so one slot is enough).
static hid_t saved = -1;

static void keep_err(void) {
	if (saved < 0) saved = H5Eget_current_stack();
}

void tv_err_reset(void) {
	if (saved >= 0) H5Eclose_stack(saved);
	saved = -1;
	H5Eclear2(H5E_DEFAULT);
}

typedef struct {
	char *buf;
	size_t len, cap;
	int oom;
} tv_sb;

static void sb_add(tv_sb *b, const char *s, size_t n) {
	if (b->oom) return;
	if (b->len + n + 1 > b->cap) {
		size_t cap = b->cap ? b->cap * 2 : 256;
		while (cap < b->len + n + 1) cap *= 2;
		char *nb = realloc(b->buf, cap);
		if (!nb) { b->oom = 1; return; }
		b->buf = nb;
		b->cap = cap;
	}
	memcpy(b->buf + b->len, s, n);
	b->len += n;
	b->buf[b->len] = 0;
}

static void sb_str(tv_sb *b, const char *s) { if (s) sb_add(b, s, strlen(s)); }

// walk_cb writes one entry as "func\x1fmajor\x1fminor\x1fdesc\x1e"
// (descriptions may hold newlines: sec2's includes ctime()).
static herr_t walk_cb(unsigned n, const H5E_error2_t *e, void *data) {
	(void)n;
	tv_sb *b = data;
	char maj[128] = "", min[128] = "";
	H5Eget_msg(e->maj_num, NULL, maj, sizeof maj);
	H5Eget_msg(e->min_num, NULL, min, sizeof min);
	sb_str(b, e->func_name);
	sb_add(b, "\x1f", 1);
	sb_str(b, maj);
	sb_add(b, "\x1f", 1);
	sb_str(b, min);
	sb_add(b, "\x1f", 1);
	sb_str(b, e->desc);
	sb_add(b, "\x1e", 1);
	return 0;
}

// tv_err_take returns the kept (or else current) error stack of this
// thread, outermost call first, and clears it. NULL: empty or no memory.
char *tv_err_take(size_t *len) {
	tv_sb b = {0};
	hid_t st = saved >= 0 ? saved : H5E_DEFAULT;
	H5Ewalk2(st, H5E_WALK_DOWNWARD, walk_cb, &b);
	tv_err_reset();
	if (b.oom) { free(b.buf); return NULL; }
	*len = b.len;
	return b.buf;
}

// tv_trim_threshold is the free memory glibc may keep at the top of a
// heap before giving it back. HDF5 allocates and frees chunk and filter
// buffers (about 1 MiB) from cgo threads, that is from glibc's per-thread
// arenas, which give freed memory back with madvise(MADV_DONTNEED) at the
// default threshold (128 KiB): one TLB shootdown across all CPUs per
// chunk, which on virtual machines cost about half of convert's CPU time
// (measured: 3.2 s of 6.3 s CPU on 78 MB of text; 0.3 s with this
// threshold). Peak memory is not raised: what is kept was already in use.
// mallopt(3): setting it also fixes the mmap threshold at its default.
#define TV_TRIM_THRESHOLD (64 << 20)

void tv_init(void) {
	mallopt(M_TRIM_THRESHOLD, TV_TRIM_THRESHOLD);
	H5open();
	H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
}

// tv_quiet silences the error stack of the calling thread: thread-safe
// builds of HDF5 keep that setting per thread.
void tv_quiet(void) {
	H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
}

int tv_libversion(unsigned *maj, unsigned *min, unsigned *rel) { return H5get_libversion(maj, min, rel); }

hid_t tv_memtype(int code) {
	switch (code) {
	case TV_T_F64: return H5T_NATIVE_DOUBLE;
	case TV_T_F32: return H5T_NATIVE_FLOAT;
	case TV_T_I64: return H5T_NATIVE_INT64;
	case TV_T_I32: return H5T_NATIVE_INT32;
	case TV_T_I16: return H5T_NATIVE_INT16;
	case TV_T_I8: return H5T_NATIVE_INT8;
	case TV_T_U8: return H5T_NATIVE_UINT8;
	case TV_T_U32: return H5T_NATIVE_UINT32;
	case TV_T_U64: return H5T_NATIVE_UINT64;
	}
	return -1;
}

hid_t tv_filetype(int code) {
	switch (code) {
	case TV_T_F64: return H5T_IEEE_F64LE;
	case TV_T_F32: return H5T_IEEE_F32LE;
	case TV_T_I64: return H5T_STD_I64LE;
	case TV_T_I32: return H5T_STD_I32LE;
	case TV_T_I16: return H5T_STD_I16LE;
	case TV_T_I8: return H5T_STD_I8LE;
	case TV_T_U8: return H5T_STD_U8LE;
	case TV_T_U32: return H5T_STD_U32LE;
	case TV_T_U64: return H5T_STD_U64LE;
	}
	return -1;
}

long tv_obj_count(void) {
	return (long)H5Fget_obj_count(H5F_OBJ_ALL, H5F_OBJ_ALL);
}

// ---- access policy ---------------------------------------------------

static void refuse(tv_ctx *c, int kind, const char *file, const char *obj, const char *why) {
	c->refused = kind;
	snprintf(c->target, sizeof c->target, "%s%s%s", file ? file : "", obj ? ":" : "", obj ? obj : "");
	snprintf(c->reason, sizeof c->reason, "%s", why);
}

// confined reports whether name, taken relative to dir, is a regular file
// inside dir: no absolute names, no "..", symbolic links resolved before
// the containment check, special files (FIFOs, devices) refused.
static int confined(const char *dir, const char *name, const char **why) {
	if (!dir) { *why = "outside data is refused"; return 0; }
	if (name[0] == '/') { *why = "absolute name"; return 0; }
	for (const char *p = name; *p;) {
		const char *q = strchr(p, '/');
		size_t l = q ? (size_t)(q - p) : strlen(p);
		if (l == 2 && p[0] == '.' && p[1] == '.') { *why = "name leaves the allowed folder"; return 0; }
		p += l;
		while (*p == '/') p++;
	}
	size_t n = strlen(dir) + strlen(name) + 2;
	char *full = malloc(n);
	if (!full) { *why = "out of memory"; return 0; }
	snprintf(full, n, "%s/%s", dir, name);
	char real[PATH_MAX];
	int ok = realpath(full, real) != NULL;
	free(full);
	if (!ok) { *why = "target does not exist"; return 0; }
	size_t dl = strlen(dir);
	if (strncmp(real, dir, dl) != 0 || real[dl] != '/') { *why = "link leaves the allowed folder"; return 0; }
	struct stat st;
	if (stat(real, &st) != 0 || !S_ISREG(st.st_mode)) { *why = "not a regular file"; return 0; }
	return 1;
}

// elink_cb runs before HDF5 opens an external link's file: refusing here
// means the target is never opened (HDF5 1.10 reference manual,
// H5Pset_elink_cb).
static herr_t elink_cb(const char *parent_file, const char *parent_group, const char *child_file,
                       const char *child_obj, unsigned *acc_flags, hid_t fapl, void *data) {
	(void)parent_file; (void)parent_group; (void)fapl;
	tv_ctx *c = data;
	const char *why;
	if (!confined(c->dir, child_file, &why)) {
		refuse(c, TV_EXT_LINK, child_file, child_obj, why);
		return -1;
	}
	*acc_flags = H5F_ACC_RDONLY;
	return 0;
}

tv_ctx *tv_ctx_new(const char *dir) {
	tv_ctx *c = calloc(1, sizeof *c);
	if (!c) return NULL;
	c->lapl = c->dapl = -1;
	if (dir) {
		c->dir = strdup(dir);
		if (!c->dir) goto fail;
	}
	c->lapl = H5Pcreate(H5P_LINK_ACCESS);
	c->dapl = H5Pcreate(H5P_DATASET_ACCESS);
	if (c->lapl < 0 || c->dapl < 0) goto fail;
	if (H5Pset_elink_cb(c->lapl, elink_cb, c) < 0 || H5Pset_elink_cb(c->dapl, elink_cb, c) < 0) goto fail;
	if (dir) {
		// Relative external names resolve inside dir first (HDF5 1.10
		// reference manual: H5Pset_elink_prefix, H5Pset_efile_prefix,
		// H5Pset_virtual_prefix).
		if (H5Pset_elink_prefix(c->lapl, dir) < 0 || H5Pset_elink_prefix(c->dapl, dir) < 0) goto fail;
		if (H5Pset_efile_prefix(c->dapl, dir) < 0) goto fail;
		if (H5Pset_virtual_prefix(c->dapl, dir) < 0) goto fail;
	}
	return c;
fail:
	keep_err();
	tv_ctx_free(c);
	return NULL;
}

void tv_ctx_free(tv_ctx *c) {
	if (!c) return;
	if (c->lapl >= 0) H5Pclose(c->lapl);
	if (c->dapl >= 0) H5Pclose(c->dapl);
	free(c->dir);
	free(c);
}

// ---- files -----------------------------------------------------------

hid_t tv_open(tv_ctx *c, const char *path, int rw) {
	(void)c;
	return H5Fopen(path, rw ? H5F_ACC_RDWR : H5F_ACC_RDONLY, H5P_DEFAULT);
}

// imgname is longer than PATH_MAX: the core driver's check that no file
// of the image's name exists fails with ENAMETOOLONG before any lookup,
// so no ./file_image_N (or anything else) is ever probed or opened.
static char imgname[PATH_MAX + 16];

// tv_open_image opens an HDF5 file held in memory, read-only, with the
// core driver and no backing store (HDF5 1.10 reference manual,
// H5Pset_fapl_core, H5Pset_file_image: the image is copied).
hid_t tv_open_image(const void *buf, size_t size) {
	if (!imgname[0]) {
		memset(imgname, 'm', sizeof imgname - 1);
		imgname[sizeof imgname - 1] = 0;
	}
	hid_t fapl = H5Pcreate(H5P_FILE_ACCESS), f = -1;
	if (fapl < 0) goto done;
	if (H5Pset_fapl_core(fapl, 1 << 16, 0) < 0) goto done;
	if (H5Pset_file_image(fapl, (void *)buf, size) < 0) goto done;
	f = H5Fopen(imgname, H5F_ACC_RDONLY, fapl);
done:
	if (f < 0) keep_err();
	if (fapl >= 0) H5Pclose(fapl);
	return f;
}

// tv_create creates a new file (failing if it exists). libver_low 18 or
// 110 sets the oldest HDF5 version whose file format may be used
// (H5Pset_libver_bounds): 1.8 brings compact groups stored in object
// headers; 0 keeps the library default (earliest). istore_k > 0 sets the
// half-rank of chunk-index B-tree nodes (H5Pset_istore_k); small values
// keep files with few chunks small.
hid_t tv_create(const char *path, int libver_low, int istore_k) {
	hid_t fapl = H5Pcreate(H5P_FILE_ACCESS);
	hid_t fcpl = H5Pcreate(H5P_FILE_CREATE);
	hid_t f = -1;
	if (fapl < 0 || fcpl < 0) goto done;
	if (libver_low == 18 && H5Pset_libver_bounds(fapl, H5F_LIBVER_V18, H5F_LIBVER_LATEST) < 0) goto done;
	if (libver_low == 110 && H5Pset_libver_bounds(fapl, H5F_LIBVER_V110, H5F_LIBVER_LATEST) < 0) goto done;
	if (istore_k > 0 && H5Pset_istore_k(fcpl, (unsigned)istore_k) < 0) goto done;
	// No object times (the root group's here, each object's at its
	// creation): the same writes give the same bytes whenever they run.
	if (H5Pset_obj_track_times(fcpl, 0) < 0) goto done;
	f = H5Fcreate(path, H5F_ACC_EXCL, fcpl, fapl);
done:
	if (f < 0) keep_err();
	if (fapl >= 0) H5Pclose(fapl);
	if (fcpl >= 0) H5Pclose(fcpl);
	return f;
}

int tv_close_file(hid_t f) { return H5Fclose(f); }

// ---- links -----------------------------------------------------------

// exists reports whether every component of path resolves (H5Lexists fails
// when an intermediate group is missing, so walk the components).
static int exists(tv_ctx *c, hid_t loc, const char *path) {
	if (strcmp(path, "/") == 0 || strcmp(path, ".") == 0) return 1;
	size_t n = strlen(path);
	char *buf = malloc(n + 1);
	if (!buf) return -1;
	memcpy(buf, path, n + 1);
	int ok = 1;
	for (size_t i = 1; i <= n && ok == 1; i++) {
		if (buf[i] == '/' || buf[i] == 0) {
			char ch = buf[i];
			buf[i] = 0;
			if (H5Lexists(loc, buf, c->lapl) <= 0) ok = 0;
			else if (ch == '/' && H5Oexists_by_name(loc, buf, c->lapl) <= 0) ok = 0;
			buf[i] = ch;
		}
	}
	free(buf);
	return ok;
}

int tv_kind(tv_ctx *c, hid_t loc, const char *path) {
	int ex = exists(c, loc, path);
	if (ex < 0) return TV_E_NOMEM;
	if (!ex) return TV_KIND_MISSING;
	if (strcmp(path, "/") != 0 && strcmp(path, ".") != 0) {
		tv_linfo li;
		if (tv_lget_info(loc, path, &li, c->lapl) < 0) return -1;
		if (li.type == H5L_TYPE_EXTERNAL) return TV_KIND_EXTERNAL;
		if (li.type == H5L_TYPE_SOFT && H5Oexists_by_name(loc, path, c->lapl) <= 0) return TV_KIND_SOFT;
	}
	tv_oinfo oi;
	if (tv_oget_by_name(loc, path, &oi, H5O_INFO_BASIC, c->lapl) < 0) return -1;
	switch (oi.type) {
	case H5O_TYPE_GROUP: return TV_KIND_GROUP;
	case H5O_TYPE_DATASET: return TV_KIND_DATASET;
	case H5O_TYPE_NAMED_DATATYPE: return TV_KIND_DATATYPE;
	default: return TV_KIND_OTHER;
	}
}

typedef struct {
	tv_sb sb;
	long n;
} tv_names;

static herr_t name_cb(const char *name, void *data) {
	tv_names *t = data;
	sb_add(&t->sb, name, strlen(name) + 1);
	t->n++;
	return t->sb.oom ? -1 : 0;
}

#if TV_HDF5_TOKENS
static herr_t link_cb(hid_t g, const char *name, const H5L_info2_t *li, void *data) {
#else
static herr_t link_cb(hid_t g, const char *name, const H5L_info_t *li, void *data) {
#endif
	(void)g; (void)li;
	return name_cb(name, data);
}

static herr_t attr_cb(hid_t o, const char *name, const H5A_info_t *ai, void *data) {
	(void)o; (void)ai;
	return name_cb(name, data);
}

// tv_link_names lists a group's link names in name order in one pass
// (packed, NUL-separated); one pass keeps big groups linear.
char *tv_link_names(tv_ctx *c, hid_t loc, const char *path, long *n, size_t *total) {
	tv_names t = {{0}, 0};
	hsize_t idx = 0;
	if (tv_literate_by_name(loc, path, H5_INDEX_NAME, H5_ITER_INC, &idx, link_cb, &t, c->lapl) < 0 || t.sb.oom) {
		keep_err();
		free(t.sb.buf);
		return NULL;
	}
	*n = t.n;
	*total = t.sb.len;
	if (!t.sb.buf) return calloc(1, 1);
	return t.sb.buf;
}

// probe_name is looked up before listing attributes: the lookup decodes
// every attribute message without building HDF5's attribute table, whose
// error path in 1.10 frees table slots that were never filled (seen as a
// crash in H5A__attr_release_table on byte-flipped files; HDF5 1.10 source,
// H5Aint.c, H5A__compact_build_table_cb). Once all messages decode, the
// table build that follows cannot take that path.
static const char probe_name[] = "\x7ftrajvault-attribute-probe\x7f";

char *tv_attr_names(tv_ctx *c, hid_t loc, const char *path, long *n, size_t *total) {
	tv_names t = {{0}, 0};
	hsize_t idx = 0;
	htri_t ex = H5Aexists_by_name(loc, path, probe_name, c->lapl);
	if (ex != 0) {
		if (ex < 0) keep_err();
		return NULL;
	}
	if (H5Aiterate_by_name(loc, path, H5_INDEX_NAME, H5_ITER_INC, &idx, attr_cb, &t, c->lapl) < 0 || t.sb.oom) {
		keep_err();
		free(t.sb.buf);
		return NULL;
	}
	*n = t.n;
	*total = t.sb.len;
	if (!t.sb.buf) return calloc(1, 1);
	return t.sb.buf;
}

int tv_object_id(tv_ctx *c, hid_t loc, const char *path, unsigned long *fileno, unsigned char tok[16]) {
	tv_oinfo oi;
	memset(tok, 0, 16);
	if (tv_oget_by_name(loc, path, &oi, H5O_INFO_BASIC, c->lapl) < 0) return -1;
	*fileno = oi.fileno;
#if TV_HDF5_TOKENS
	// H5O_token_t is H5O_MAX_TOKEN_SIZE (16) opaque bytes; equal objects
	// in one file have equal tokens (1.12 reference manual, H5Otoken_cmp).
	memcpy(tok, &oi.token, sizeof(oi.token) < 16 ? sizeof(oi.token) : 16);
#else
	memcpy(tok, &oi.addr, sizeof(oi.addr));
#endif
	return 0;
}

int tv_hardlink(tv_ctx *c, hid_t loc, const char *src, const char *dst) {
	return H5Lcreate_hard(loc, src, loc, dst, H5P_DEFAULT, c->lapl);
}

int tv_softlink(tv_ctx *c, hid_t loc, const char *target, const char *dst) {
	return H5Lcreate_soft(target, loc, dst, H5P_DEFAULT, c->lapl);
}

int tv_group_create(tv_ctx *c, hid_t loc, const char *path) {
	(void)c;
	hid_t gcpl = H5Pcreate(H5P_GROUP_CREATE);
	if (gcpl < 0) return -1;
	hid_t g = -1;
	if (H5Pset_obj_track_times(gcpl, 0) >= 0) g = H5Gcreate2(loc, path, H5P_DEFAULT, gcpl, H5P_DEFAULT);
	H5Pclose(gcpl);
	if (g < 0) return -1;
	return H5Gclose(g);
}

int tv_delete_link(tv_ctx *c, hid_t loc, const char *path) { return H5Ldelete(loc, path, c->lapl); }
int tv_delete_attr(tv_ctx *c, hid_t loc, const char *path, const char *name) {
	return H5Adelete_by_name(loc, path, name, c->lapl);
}

// ---- types and spaces ------------------------------------------------

static int fill_info(hid_t type, hid_t space, tv_info *out) {
	memset(out, 0, sizeof(*out));
	H5T_class_t cl = H5Tget_class(type);
	switch (cl) {
	case H5T_INTEGER: out->cls = TV_CLS_INT; out->is_signed = H5Tget_sign(type) == H5T_SGN_2; break;
	case H5T_FLOAT: out->cls = TV_CLS_FLOAT; break;
	case H5T_STRING: out->cls = TV_CLS_STRING; out->is_vlen = H5Tis_variable_str(type) > 0; break;
	case H5T_ENUM: out->cls = TV_CLS_ENUM; break;
	case H5T_COMPOUND: out->cls = TV_CLS_COMPOUND; break;
	case H5T_REFERENCE: out->cls = TV_CLS_REFERENCE; break;
	default: out->cls = TV_CLS_OTHER;
	}
	out->size = H5Tget_size(type);
	H5S_class_t sc = H5Sget_simple_extent_type(space);
	if (sc == H5S_NULL) { out->rank = -1; return 0; }
	if (sc < 0) return -1;
	int r = H5Sget_simple_extent_ndims(space);
	if (r < 0) return -1;
	if (r > TV_MAXRANK) return TV_E_RANK;
	out->rank = r;
	if (r > 0 && H5Sget_simple_extent_dims(space, out->dims, out->maxdims) < 0) return -1;
	return 0;
}

// numeric_ok checks a stored number type before HDF5 converts it: whole
// bytes of 1, 2, 4 or 8, and every bit field inside the element (a
// corrupt size or field makes the conversion read past its buffers).
static int numeric_ok(hid_t t) {
	H5T_class_t cl = H5Tget_class(t);
	if (cl != H5T_INTEGER && cl != H5T_FLOAT) return 0;
	size_t size = H5Tget_size(t);
	if (size != 1 && size != 2 && size != 4 && size != 8) return 0;
	size_t bits = 8 * size;
	size_t prec = H5Tget_precision(t);
	int off = H5Tget_offset(t);
	if (prec == 0 || off < 0 || prec + (size_t)off > bits) return 0;
	if (cl == H5T_FLOAT) {
		size_t spos, epos, esize, mpos, msize;
		if (size == 1) return 0;
		if (H5Tget_fields(t, &spos, &epos, &esize, &mpos, &msize) < 0) return 0;
		if (spos >= bits || esize == 0 || msize == 0 || epos + esize > bits || mpos + msize > bits) return 0;
		if (esize > 32) return 0;
	}
	return 1;
}

// fits checks that the selection of space, in memory type code, fits in
// buflen bytes: the only bound on what HDF5 writes into the buffer,
// fill values included.
static int fits(hid_t space, int memcode, size_t buflen) {
	hssize_t np = H5Sget_select_npoints(space);
	if (np < 0) return 0;
	size_t es = H5Tget_size(tv_memtype(memcode));
	if (es == 0) return 0;
	return (uint64_t)np <= buflen / es;
}

// ---- attributes ------------------------------------------------------

int tv_attr_info(tv_ctx *c, hid_t loc, const char *path, const char *name, tv_info *out) {
	hid_t a = H5Aopen_by_name(loc, path, name, H5P_DEFAULT, c->lapl);
	if (a < 0) return -1;
	hid_t t = H5Aget_type(a), s = H5Aget_space(a);
	int rc = (t < 0 || s < 0) ? -1 : fill_info(t, s, out);
	if (rc == -1) keep_err();
	if (t >= 0) H5Tclose(t);
	if (s >= 0) H5Sclose(s);
	H5Aclose(a);
	return rc;
}

int tv_attr_read(tv_ctx *c, hid_t loc, const char *path, const char *name, int memcode, void *buf, size_t buflen) {
	hid_t a = H5Aopen_by_name(loc, path, name, H5P_DEFAULT, c->lapl);
	if (a < 0) return -1;
	int rc = -1;
	hid_t t = H5Aget_type(a), s = H5Aget_space(a);
	if (t < 0 || s < 0) goto done;
	if (!numeric_ok(t)) { rc = TV_E_TYPE; goto done; }
	if (H5Sselect_all(s) < 0) goto done;
	if (!fits(s, memcode, buflen)) { rc = TV_E_SIZE; goto done; }
	rc = H5Aread(a, tv_memtype(memcode), buf) < 0 ? -1 : 0;
done:
	if (rc == -1) keep_err();
	if (t >= 0) H5Tclose(t);
	if (s >= 0) H5Sclose(s);
	H5Aclose(a);
	return rc;
}

// pack_fixed returns n strings as one malloc'ed buffer of NUL-terminated
// pieces; the Go side splits it.
static char *pack_fixed(const char *raw, size_t size, size_t n, size_t *total) {
	if (size == SIZE_MAX || n > (SIZE_MAX - 1) / (size + 1)) return NULL;
	char *out = malloc(n * (size + 1) + 1);
	if (!out) return NULL;
	size_t k = 0;
	for (size_t i = 0; i < n; i++) {
		const char *p = raw + i * size;
		size_t l = strnlen(p, size);
		while (l > 0 && p[l - 1] == ' ') l--; // space-padded strings
		memcpy(out + k, p, l);
		k += l;
		out[k++] = 0;
	}
	*total = k;
	return out;
}

static char *pack_vlen(char **raw, size_t n, size_t cap, size_t *total, int *rc) {
	size_t need = 1;
	for (size_t i = 0; i < n; i++) {
		need += (raw[i] ? strlen(raw[i]) : 0) + 1;
		if (need > cap) { *rc = TV_E_SIZE; return NULL; }
	}
	char *out = malloc(need);
	if (!out) { *rc = TV_E_NOMEM; return NULL; }
	size_t k = 0;
	for (size_t i = 0; i < n; i++) {
		size_t l = raw[i] ? strlen(raw[i]) : 0;
		if (l) memcpy(out + k, raw[i], l);
		k += l;
		out[k++] = 0;
	}
	*total = k;
	return out;
}

// read_strings reads a string attribute (isattr) or dataset into a packed
// buffer of at most cap bytes of raw data; *rc says why it failed.
static char *read_strings(hid_t obj, int isattr, size_t cap, size_t *total, int *rc) {
	char *out = NULL;
	*rc = -1;
	hid_t ft = isattr ? H5Aget_type(obj) : H5Dget_type(obj);
	hid_t sp = isattr ? H5Aget_space(obj) : H5Dget_space(obj);
	hid_t mt = -1;
	if (ft < 0 || sp < 0) goto done;
	if (H5Tget_class(ft) != H5T_STRING) { *rc = TV_E_TYPE; goto done; }
	hssize_t sn = H5Sget_simple_extent_npoints(sp);
	if (sn < 0) goto done;
	size_t n = (size_t)sn;
	mt = H5Tcopy(H5T_C_S1);
	if (mt < 0) goto done;
	if (H5Tis_variable_str(ft) > 0) {
		if (n > cap / sizeof(char *)) { *rc = TV_E_SIZE; goto done; }
		if (H5Tset_size(mt, H5T_VARIABLE) < 0 || H5Tset_cset(mt, H5Tget_cset(ft)) < 0) goto done;
		char **raw = calloc(n + 1, sizeof(char *));
		if (!raw) { *rc = TV_E_NOMEM; goto done; }
		herr_t e = isattr ? H5Aread(obj, mt, raw) : H5Dread(obj, mt, H5S_ALL, H5S_ALL, H5P_DEFAULT, raw);
		if (e >= 0) {
			out = pack_vlen(raw, n, cap, total, rc);
			tv_reclaim(mt, sp, H5P_DEFAULT, raw);
		} else {
			keep_err();
		}
		free(raw);
	} else {
		size_t size = H5Tget_size(ft);
		if (size == 0 || n > cap / size) { *rc = TV_E_SIZE; goto done; }
		if (H5Tset_size(mt, size) < 0 || H5Tset_cset(mt, H5Tget_cset(ft)) < 0 ||
		    H5Tset_strpad(mt, H5T_STR_NULLPAD) < 0) goto done;
		char *raw = calloc(n * size + 1, 1);
		if (!raw) { *rc = TV_E_NOMEM; goto done; }
		herr_t e = isattr ? H5Aread(obj, mt, raw) : H5Dread(obj, mt, H5S_ALL, H5S_ALL, H5P_DEFAULT, raw);
		if (e >= 0) {
			out = pack_fixed(raw, size, n, total);
			if (!out) *rc = TV_E_NOMEM;
		} else {
			keep_err();
		}
		free(raw);
	}
done:
	if (!out && *rc == -1) keep_err();
	if (mt >= 0) H5Tclose(mt);
	if (ft >= 0) H5Tclose(ft);
	if (sp >= 0) H5Sclose(sp);
	return out;
}

char *tv_attr_read_strings(tv_ctx *c, hid_t loc, const char *path, const char *name, size_t cap, size_t *total, int *rc) {
	hid_t a = H5Aopen_by_name(loc, path, name, H5P_DEFAULT, c->lapl);
	if (a < 0) { *rc = -1; return NULL; }
	char *out = read_strings(a, 1, cap, total, rc);
	H5Aclose(a);
	return out;
}

static hid_t make_space(int rank, const hsize_t *dims, const hsize_t *maxdims) {
	if (rank == 0) return H5Screate(H5S_SCALAR);
	return H5Screate_simple(rank, dims, maxdims);
}

static int drop_attr(tv_ctx *c, hid_t loc, const char *path, const char *name) {
	htri_t ex = H5Aexists_by_name(loc, path, name, c->lapl);
	if (ex < 0) return -1;
	if (ex > 0 && H5Adelete_by_name(loc, path, name, c->lapl) < 0) return -1;
	return 0;
}

int tv_attr_write(tv_ctx *c, hid_t loc, const char *path, const char *name, int filecode, int memcode,
                  int rank, const hsize_t *dims, const void *buf) {
	if (drop_attr(c, loc, path, name) < 0) return -1;
	hid_t s = make_space(rank, dims, NULL);
	if (s < 0) return -1;
	hid_t a = H5Acreate_by_name(loc, path, name, tv_filetype(filecode), s, H5P_DEFAULT, H5P_DEFAULT, c->lapl);
	int rc = -1;
	if (a >= 0) {
		rc = H5Awrite(a, tv_memtype(memcode), buf) < 0 ? -1 : 0;
		if (rc < 0) keep_err();
		H5Aclose(a);
	} else {
		keep_err();
	}
	H5Sclose(s);
	return rc;
}

// string_type builds a string type: variable length, or fixed length
// sized to the longest of the n packed strings (NUL-terminated). The
// character set is ASCII when every byte is ASCII (the H5MD units module
// asks for ASCII), UTF-8 otherwise.
static hid_t string_type(const char *packed, int n, int vlen, const char ***ptrs, char **fixed) {
	const char **p = calloc((size_t)n + 1, sizeof(char *));
	if (!p) return TV_E_NOMEM;
	size_t maxl = 0;
	int ascii = 1;
	const char *q = packed;
	for (int i = 0; i < n; i++) {
		p[i] = q;
		size_t l = strlen(q);
		if (l > maxl) maxl = l;
		for (size_t k = 0; k < l; k++)
			if ((unsigned char)q[k] > 127) ascii = 0;
		q += l + 1;
	}
	hid_t t = H5Tcopy(H5T_C_S1);
	if (t < 0) { free(p); return -1; }
	if (H5Tset_cset(t, ascii ? H5T_CSET_ASCII : H5T_CSET_UTF8) < 0) goto fail;
	if (vlen) {
		if (H5Tset_size(t, H5T_VARIABLE) < 0) goto fail;
		*ptrs = p;
		*fixed = NULL;
		return t;
	}
	size_t size = maxl + 1;
	if (H5Tset_size(t, size) < 0 || H5Tset_strpad(t, H5T_STR_NULLTERM) < 0) goto fail;
	char *f = calloc((size_t)n * size + 1, 1);
	if (!f) { free(p); H5Tclose(t); return TV_E_NOMEM; }
	for (int i = 0; i < n; i++) memcpy(f + (size_t)i * size, p[i], strlen(p[i]));
	free(p);
	*ptrs = NULL;
	*fixed = f;
	return t;
fail:
	keep_err();
	free(p);
	H5Tclose(t);
	return -1;
}

int tv_attr_write_strings(tv_ctx *c, hid_t loc, const char *path, const char *name, const char *packed,
                          int n, int rank, int vlen) {
	if (drop_attr(c, loc, path, name) < 0) return -1;
	const char **ptrs = NULL;
	char *fixed = NULL;
	hid_t t = string_type(packed, n, vlen, &ptrs, &fixed);
	if (t < 0) return (int)t;
	hsize_t dims[1] = {(hsize_t)n};
	hid_t s = make_space(rank, dims, NULL);
	int rc = -1;
	if (s >= 0) {
		hid_t a = H5Acreate_by_name(loc, path, name, t, s, H5P_DEFAULT, H5P_DEFAULT, c->lapl);
		if (a >= 0) {
			rc = H5Awrite(a, t, vlen ? (const void *)ptrs : (const void *)fixed) < 0 ? -1 : 0;
			if (rc < 0) keep_err();
			H5Aclose(a);
		} else {
			keep_err();
		}
		H5Sclose(s);
	} else {
		keep_err();
	}
	H5Tclose(t);
	free(ptrs);
	free(fixed);
	return rc;
}

// ---- datasets --------------------------------------------------------

hid_t tv_dset_create(tv_ctx *c, hid_t loc, const char *path, int filecode, int rank, const hsize_t *dims,
                     const hsize_t *maxdims, const hsize_t *chunk, const tv_filters *f) {
	hid_t s = make_space(rank, dims, maxdims);
	if (s < 0) return -1;
	hid_t dcpl = H5Pcreate(H5P_DATASET_CREATE);
	hid_t lcpl = H5Pcreate(H5P_LINK_CREATE);
	hid_t d = -1;
	if (dcpl < 0 || lcpl < 0) goto done;
	if (H5Pset_create_intermediate_group(lcpl, 1) < 0) goto done;
	if (H5Pset_obj_track_times(dcpl, 0) < 0) goto done;
	if (chunk != NULL && rank > 0) {
		if (H5Pset_chunk(dcpl, rank, chunk) < 0) goto done;
		if (f != NULL) {
			if (f->scaleoffset >= 0 &&
			    H5Pset_scaleoffset(dcpl, f->scaleoffset == 0 ? H5Z_SO_FLOAT_DSCALE : H5Z_SO_INT,
			                       f->scaleoffset_factor) < 0) goto done;
			if (f->nbit && H5Pset_nbit(dcpl) < 0) goto done;
			if (f->shuffle && H5Pset_shuffle(dcpl) < 0) goto done;
			if (f->deflate >= 0 && H5Pset_deflate(dcpl, (unsigned)f->deflate) < 0) goto done;
			if (f->fletcher32 && H5Pset_fletcher32(dcpl) < 0) goto done;
		}
	}
	d = H5Dcreate2(loc, path, tv_filetype(filecode), s, lcpl, dcpl, c->dapl);
done:
	if (d < 0) keep_err();
	if (dcpl >= 0) H5Pclose(dcpl);
	if (lcpl >= 0) H5Pclose(lcpl);
	H5Sclose(s);
	return d;
}

hid_t tv_dset_create_strings(tv_ctx *c, hid_t loc, const char *path, const char *packed, int n, int vlen) {
	const char **ptrs = NULL;
	char *fixed = NULL;
	hid_t t = string_type(packed, n, vlen, &ptrs, &fixed);
	if (t < 0) return t;
	hsize_t dims[1] = {(hsize_t)n};
	hid_t s = H5Screate_simple(1, dims, NULL);
	hid_t lcpl = H5Pcreate(H5P_LINK_CREATE);
	hid_t dcpl = H5Pcreate(H5P_DATASET_CREATE);
	hid_t d = -1;
	if (s >= 0 && lcpl >= 0 && dcpl >= 0 && H5Pset_create_intermediate_group(lcpl, 1) >= 0 &&
	    H5Pset_obj_track_times(dcpl, 0) >= 0) {
		d = H5Dcreate2(loc, path, t, s, lcpl, dcpl, c->dapl);
		if (d >= 0 && H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, vlen ? (const void *)ptrs : (const void *)fixed) < 0) {
			keep_err();
			H5Dclose(d);
			d = -1;
		}
	}
	if (d < 0) keep_err();
	if (s >= 0) H5Sclose(s);
	if (lcpl >= 0) H5Pclose(lcpl);
	if (dcpl >= 0) H5Pclose(dcpl);
	H5Tclose(t);
	free(ptrs);
	free(fixed);
	return d;
}

int tv_dset_close(hid_t d) { return H5Dclose(d); }

int tv_dset_append(hid_t d, int memcode, hsize_t rows, const void *buf, size_t buflen) {
	hid_t fs = H5Dget_space(d);
	if (fs < 0) return -1;
	int rank = H5Sget_simple_extent_ndims(fs);
	hsize_t dims[TV_MAXRANK], start[TV_MAXRANK], count[TV_MAXRANK];
	int rc = -1;
	hid_t ms = -1;
	if (rank < 1 || rank > TV_MAXRANK || H5Sget_simple_extent_dims(fs, dims, NULL) < 0) goto done;
	for (int i = 0; i < rank; i++) { start[i] = 0; count[i] = dims[i]; }
	start[0] = dims[0];
	count[0] = rows;
	dims[0] += rows;
	ms = H5Screate_simple(rank, count, NULL);
	if (ms < 0) goto done;
	if (!fits(ms, memcode, buflen)) { rc = TV_E_SIZE; goto done; }
	if (H5Dset_extent(d, dims) < 0) goto done;
	H5Sclose(fs);
	fs = H5Dget_space(d);
	if (fs < 0) goto done;
	if (H5Sselect_hyperslab(fs, H5S_SELECT_SET, start, NULL, count, NULL) < 0) goto done;
	rc = H5Dwrite(d, tv_memtype(memcode), ms, fs, H5P_DEFAULT, buf) < 0 ? -1 : 0;
done:
	if (rc == -1) keep_err();
	if (ms >= 0) H5Sclose(ms);
	if (fs >= 0) H5Sclose(fs);
	return rc;
}

int tv_dset_write(hid_t d, int memcode, const void *buf, size_t buflen) {
	hid_t fs = H5Dget_space(d);
	if (fs < 0) return -1;
	int rc = TV_E_SIZE;
	if (fits(fs, memcode, buflen)) {
		rc = H5Dwrite(d, tv_memtype(memcode), H5S_ALL, H5S_ALL, H5P_DEFAULT, buf) < 0 ? -1 : 0;
		if (rc < 0) keep_err();
	}
	H5Sclose(fs);
	return rc;
}

// outside checks a dataset's creation properties for data kept outside
// the file: external raw-data files (H5Pget_external_count) and virtual
// dataset sources (H5Pget_layout == H5D_VIRTUAL, H5Pget_virtual_count);
// HDF5 1.10 reference manual. Allowed only as regular files inside the
// context's folder; a source in the same file (".") is refused too, since
// a dataset mapping itself sends HDF5 into unbounded recursion.
static int outside(tv_ctx *c, hid_t dcpl) {
	int next = H5Pget_external_count(dcpl);
	if (next < 0) return -1;
	for (int i = 0; i < next; i++) {
		char name[1024] = "";
		off_t off;
		hsize_t size;
		if (H5Pget_external(dcpl, (unsigned)i, sizeof name, name, &off, &size) < 0) return -1;
		name[sizeof name - 1] = 0;
		const char *why;
		if (!confined(c->dir, name, &why)) { refuse(c, TV_EXT_STORAGE, name, NULL, why); return TV_E_EXTERNAL; }
	}
	H5D_layout_t lay = H5Pget_layout(dcpl);
	if (lay < 0) return -1;
	if (lay == H5D_VIRTUAL) {
		size_t n = 0;
		if (H5Pget_virtual_count(dcpl, &n) < 0) return -1;
		if (n == 0) { refuse(c, TV_EXT_VIRTUAL, "", NULL, "virtual dataset without sources"); return TV_E_EXTERNAL; }
		for (size_t i = 0; i < n; i++) {
			char file[512] = "", dset[512] = "";
			if (H5Pget_virtual_filename(dcpl, i, file, sizeof file) < 0) return -1;
			if (H5Pget_virtual_dsetname(dcpl, i, dset, sizeof dset) < 0) return -1;
			file[sizeof file - 1] = dset[sizeof dset - 1] = 0;
			const char *why;
			if (strcmp(file, ".") == 0) { refuse(c, TV_EXT_VIRTUAL, file, dset, "source in the same file"); return TV_E_EXTERNAL; }
			if (!confined(c->dir, file, &why)) { refuse(c, TV_EXT_VIRTUAL, file, dset, why); return TV_E_EXTERNAL; }
		}
	}
	return 0;
}

// open_dset opens a dataset with the context's access list and returns its
// creation list; the caller closes both.
static hid_t open_dset(tv_ctx *c, hid_t loc, const char *path, hid_t *dcpl) {
	hid_t d = H5Dopen2(loc, path, c->dapl);
	if (d < 0) return -1;
	*dcpl = H5Dget_create_plist(d);
	if (*dcpl < 0) {
		keep_err();
		H5Dclose(d);
		return -1;
	}
	return d;
}

// tv_dset_info describes a dataset; with want_storage also the bytes it
// occupies, which for chunked data walks the whole chunk index
// (H5Dget_storage_size visits every chunk).
int tv_dset_info(tv_ctx *c, hid_t loc, const char *path, tv_info *t, tv_storage *st, int want_storage) {
	hid_t pl = -1;
	hid_t d = open_dset(c, loc, path, &pl);
	if (d < 0) return -1;
	hid_t ty = H5Dget_type(d), sp = H5Dget_space(d);
	int rc = -1;
	if (ty < 0 || sp < 0) goto done;
	if ((rc = fill_info(ty, sp, t)) < 0) goto done;
	rc = -1;
	memset(st, 0, sizeof(*st));
	st->nexternal = H5Pget_external_count(pl);
	switch (H5Pget_layout(pl)) {
	case H5D_COMPACT: st->layout = 0; break;
	case H5D_CONTIGUOUS: st->layout = 1; break;
	case H5D_CHUNKED:
		st->layout = 2;
		if (H5Pget_chunk(pl, TV_MAXRANK, st->chunk) < 0) goto done;
		break;
	case H5D_VIRTUAL: st->layout = 3; break;
	default: st->layout = -1;
	}
	st->nfilters = H5Pget_nfilters(pl);
	if (st->nexternal < 0 || st->nfilters < 0) goto done;
	if (want_storage && st->layout != 3 && st->nexternal == 0) st->storage = (unsigned long long)H5Dget_storage_size(d);
	rc = outside(c, pl);
done:
	if (rc == -1) keep_err();
	if (ty >= 0) H5Tclose(ty);
	if (sp >= 0) H5Sclose(sp);
	H5Pclose(pl);
	H5Dclose(d);
	return rc;
}

int tv_dset_filter(tv_ctx *c, hid_t loc, const char *path, int idx, unsigned *id, char *name, size_t namelen,
                   unsigned *cd, size_t *ncd) {
	hid_t pl = -1;
	hid_t d = open_dset(c, loc, path, &pl);
	if (d < 0) return -1;
	unsigned flags = 0, conf = 0;
	int rc = -1;
	H5Z_filter_t f = H5Pget_filter2(pl, (unsigned)idx, &flags, ncd, cd, namelen, name, &conf);
	if (f >= 0) { *id = (unsigned)f; rc = 0; } else keep_err();
	H5Pclose(pl);
	H5Dclose(d);
	return rc;
}

// tv_dset_open_checked opens a dataset for reading numbers: outside data
// refused, the stored type checked, shape in *t. Returns the dataset id
// (caller closes) or -1 with the reason in *rc.
hid_t tv_dset_open_checked(tv_ctx *c, hid_t loc, const char *path, tv_info *t, int *rc) {
	hid_t pl = -1;
	*rc = -1;
	hid_t d = open_dset(c, loc, path, &pl);
	if (d < 0) return -1;
	hid_t ty = -1, sp = -1;
	int r = outside(c, pl);
	if (r < 0) { *rc = r; goto fail; }
	ty = H5Dget_type(d);
	sp = H5Dget_space(d);
	if (ty < 0 || sp < 0) goto fail;
	if ((r = fill_info(ty, sp, t)) < 0) { *rc = r; goto fail; }
	if (!numeric_ok(ty)) { *rc = TV_E_TYPE; goto fail; }
	H5Tclose(ty);
	H5Sclose(sp);
	H5Pclose(pl);
	*rc = 0;
	return d;
fail:
	if (*rc == -1) keep_err();
	if (ty >= 0) H5Tclose(ty);
	if (sp >= 0) H5Sclose(sp);
	H5Pclose(pl);
	H5Dclose(d);
	return -1;
}

// xfer_for is the transfer list of a read of buflen bytes: its
// type-conversion buffer holds the whole read (every memory type is 8
// bytes, as wide as any stored numeric type), at least 4 KiB, or
// H5P_DEFAULT when HDF5's default (1 MiB) is smaller. HDF5 allocates that
// buffer zeroed on the first read that converts (ints to int64 or
// float64), which for a small read cost more than the read: 1 MiB written
// and 256 page faults in a process that reads one frame. A read larger
// than the buffer is converted in strips, with the same result (HDF5 1.10
// reference manual, H5Pset_buffer). -1 when the list cannot be made.
static hid_t xfer_for(size_t buflen) {
	const size_t lo = 4096, def = 1 << 20;
	size_t n = buflen < lo ? lo : buflen;
	if (n >= def) return H5P_DEFAULT;
	hid_t x = H5Pcreate(H5P_DATASET_XFER);
	if (x < 0) return -1;
	if (H5Pset_buffer(x, n, NULL, NULL) < 0) {
		H5Pclose(x);
		return -1;
	}
	return x;
}

// select_box selects the hyperslab start/count of the file space fs
// and creates the matching memory space *ms for a buffer of buflen bytes
// of memcode: 0, -1 (library error) or TV_E_SIZE (rank, bounds or buffer
// do not match).
static int select_box(hid_t fs, int rank, const hsize_t *start, const hsize_t *count,
                      int memcode, size_t buflen, hid_t *ms) {
	if (H5Sget_simple_extent_ndims(fs) != rank) return TV_E_SIZE;
	if (H5Sselect_hyperslab(fs, H5S_SELECT_SET, start, NULL, count, NULL) < 0) return -1;
	if (H5Sselect_valid(fs) <= 0) return TV_E_SIZE;
	*ms = H5Screate_simple(rank, count, NULL);
	if (*ms < 0) return -1;
	if (!fits(*ms, memcode, buflen)) return TV_E_SIZE;
	return 0;
}

// tv_dset_read_block reads the hyperslab start/count (whole dataset when
// start is NULL) into buf of buflen bytes, after checking it fits.
int tv_dset_read_block(hid_t d, int memcode, int rank, const hsize_t *start, const hsize_t *count,
                       void *buf, size_t buflen) {
	int rc = -1;
	hid_t fs = H5Dget_space(d), ms = -1;
	hid_t xfer = xfer_for(buflen);
	if (fs < 0 || xfer < 0) goto done;
	if (start == NULL) {
		if (!fits(fs, memcode, buflen)) { rc = TV_E_SIZE; goto done; }
		rc = H5Dread(d, tv_memtype(memcode), H5S_ALL, H5S_ALL, xfer, buf) < 0 ? -1 : 0;
		goto done;
	}
	if ((rc = select_box(fs, rank, start, count, memcode, buflen, &ms)) != 0) goto done;
	rc = H5Dread(d, tv_memtype(memcode), ms, fs, xfer, buf) < 0 ? -1 : 0;
done:
	if (rc == -1) keep_err();
	if (ms >= 0) H5Sclose(ms);
	if (fs >= 0) H5Sclose(fs);
	if (xfer > 0 && xfer != H5P_DEFAULT) H5Pclose(xfer);
	return rc;
}

char *tv_dset_read_strings(tv_ctx *c, hid_t loc, const char *path, size_t cap, size_t *total, int *rc) {
	hid_t pl = -1;
	*rc = -1;
	hid_t d = open_dset(c, loc, path, &pl);
	if (d < 0) return NULL;
	char *out = NULL;
	int r = outside(c, pl);
	if (r < 0) {
		*rc = r;
		if (r == -1) keep_err();
	} else {
		out = read_strings(d, 0, cap, total, rc);
	}
	H5Pclose(pl);
	H5Dclose(d);
	return out;
}

// ---- direct chunk writes ---------------------------------------------

// tv_dset_pipeline_filter reads filter idx of an open dataset's pipeline
// with its client data as the library stored it at creation (the "set
// local" callbacks fill in, e.g., scale-offset's element count, type and
// fill value; HDF5 1.10 reference manual, H5Pget_filter2). Returns the
// number of filters, or -1.
int tv_dset_pipeline_filter(hid_t d, int idx, unsigned *id, unsigned *flags, unsigned *cd, size_t *ncd) {
	hid_t pl = H5Dget_create_plist(d);
	if (pl < 0) { keep_err(); return -1; }
	int n = H5Pget_nfilters(pl);
	if (n >= 0 && idx >= 0 && idx < n) {
		unsigned conf = 0;
		char name[8];
		H5Z_filter_t f = H5Pget_filter2(pl, (unsigned)idx, flags, ncd, cd, sizeof name, name, &conf);
		if (f < 0) n = -1; else *id = (unsigned)f;
	}
	if (n < 0) keep_err();
	H5Pclose(pl);
	return n;
}

// tv_pow10 gives pow(10, d) and pow(10, -d) from the C library's pow, the
// function HDF5's scale-offset filter calls (H5Zscaleoffset.c), so that Go
// code scaling by them rounds exactly as the filter does.
void tv_pow10(int d, double *up, double *down) {
	*up = pow(10.0, (double)d);
	*down = pow(10.0, -(double)d);
}

// tv_dset_set_rows sets the size of dimension 0 (the others are kept).
int tv_dset_set_rows(hid_t d, hsize_t rows) {
	hid_t fs = H5Dget_space(d);
	if (fs < 0) { keep_err(); return -1; }
	hsize_t dims[TV_MAXRANK];
	int rank = H5Sget_simple_extent_ndims(fs);
	int rc = -1;
	if (rank >= 1 && rank <= TV_MAXRANK && H5Sget_simple_extent_dims(fs, dims, NULL) >= 0) {
		dims[0] = rows;
		rc = H5Dset_extent(d, dims) < 0 ? -1 : 0;
	}
	if (rc < 0) keep_err();
	H5Sclose(fs);
	return rc;
}

// tv_dset_write_box writes the hyperslab start/count from buf (the box's
// elements in row-major order) through the library's filter pipeline.
int tv_dset_write_box(hid_t d, int memcode, int rank, const hsize_t *start, const hsize_t *count,
                      const void *buf, size_t buflen) {
	hid_t fs = H5Dget_space(d), ms = -1;
	int rc = -1;
	if (fs < 0) goto done;
	if ((rc = select_box(fs, rank, start, count, memcode, buflen, &ms)) != 0) goto done;
	rc = H5Dwrite(d, tv_memtype(memcode), ms, fs, H5P_DEFAULT, buf) < 0 ? -1 : 0;
done:
	if (rc == -1) keep_err();
	if (ms >= 0) H5Sclose(ms);
	if (fs >= 0) H5Sclose(fs);
	return rc;
}

// tv_dset_write_chunk stores one chunk already encoded by the caller with
// every filter of the pipeline applied (filter mask 0), bypassing the
// library's filters (HDF5 1.10.3+, H5Dwrite_chunk).
int tv_dset_write_chunk(hid_t d, const hsize_t *offset, const void *buf, size_t len) {
	int rc = H5Dwrite_chunk(d, H5P_DEFAULT, 0, offset, len, buf) < 0 ? -1 : 0;
	if (rc < 0) keep_err();
	return rc;
}

// tv_dset_read_chunk reads one stored chunk as it is in the file (filters
// not undone) into buf of cap bytes: its size in *len and filter mask in
// *mask. TV_E_SIZE when cap is too small (*len says how much is needed).
int tv_dset_read_chunk(hid_t d, const hsize_t *offset, unsigned *mask, void *buf, size_t cap, size_t *len) {
	hsize_t n = 0;
	if (H5Dget_chunk_storage_size(d, offset, &n) < 0) { keep_err(); return -1; }
	*len = (size_t)n;
	if (n > cap) return TV_E_SIZE;
	uint32_t m = 0;
	if (H5Dread_chunk(d, H5P_DEFAULT, offset, &m, buf) < 0) { keep_err(); return -1; }
	*mask = m;
	return 0;
}
