// shim.c: see shim.h. Each function closes every identifier it opens, on
// every path; the Go leak test counts open identifiers after each call.
#include <string.h>
#include "shim.h"

void tv_init(void) {
	H5open();
	H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
}

// tv_quiet silences the error stack of the calling thread: thread-safe
// builds of HDF5 (Debian's among them) keep that setting per thread.
void tv_quiet(void) {
	H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
}

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

// exists reports whether every component of path resolves (H5Lexists fails
// when an intermediate group is missing, so walk the components).
static int exists(hid_t loc, const char *path) {
	if (strcmp(path, "/") == 0 || strcmp(path, ".") == 0) return 1;
	size_t n = strlen(path);
	char *buf = malloc(n + 1);
	if (!buf) return 0;
	memcpy(buf, path, n + 1);
	int ok = 1;
	for (size_t i = 1; i <= n && ok; i++) {
		if (buf[i] == '/' || buf[i] == 0) {
			char c = buf[i];
			buf[i] = 0;
			if (H5Lexists(loc, buf, H5P_DEFAULT) <= 0) ok = 0;
			else if (c == '/' && H5Oexists_by_name(loc, buf, H5P_DEFAULT) <= 0) ok = 0;
			buf[i] = c;
		}
	}
	free(buf);
	return ok;
}

int tv_kind(hid_t loc, const char *path) {
	if (!exists(loc, path)) return TV_KIND_MISSING;
	if (strcmp(path, "/") != 0 && strcmp(path, ".") != 0) {
		H5L_info_t li;
		if (H5Lget_info(loc, path, &li, H5P_DEFAULT) < 0) return -1;
		if (li.type == H5L_TYPE_EXTERNAL) return TV_KIND_EXTERNAL;
		if (li.type == H5L_TYPE_SOFT && H5Oexists_by_name(loc, path, H5P_DEFAULT) <= 0) return TV_KIND_SOFT;
	}
	H5O_info_t oi;
	if (H5Oget_info_by_name2(loc, path, &oi, H5O_INFO_BASIC, H5P_DEFAULT) < 0) return -1;
	switch (oi.type) {
	case H5O_TYPE_GROUP: return TV_KIND_GROUP;
	case H5O_TYPE_DATASET: return TV_KIND_DATASET;
	case H5O_TYPE_NAMED_DATATYPE: return TV_KIND_DATATYPE;
	default: return TV_KIND_OTHER;
	}
}

long tv_nlinks(hid_t loc, const char *path) {
	H5G_info_t gi;
	if (H5Gget_info_by_name(loc, path, &gi, H5P_DEFAULT) < 0) return -1;
	return (long)gi.nlinks;
}

char *tv_link_name(hid_t loc, const char *path, hsize_t idx) {
	ssize_t n = H5Lget_name_by_idx(loc, path, H5_INDEX_NAME, H5_ITER_INC, idx, NULL, 0, H5P_DEFAULT);
	if (n < 0) return NULL;
	char *s = malloc((size_t)n + 1);
	if (!s) return NULL;
	if (H5Lget_name_by_idx(loc, path, H5_INDEX_NAME, H5_ITER_INC, idx, s, (size_t)n + 1, H5P_DEFAULT) < 0) {
		free(s);
		return NULL;
	}
	return s;
}

int tv_object_id(hid_t loc, const char *path, unsigned long *fileno, unsigned char tok[16]) {
	H5O_info_t oi;
	memset(tok, 0, 16);
	if (H5Oget_info_by_name2(loc, path, &oi, H5O_INFO_BASIC, H5P_DEFAULT) < 0) return -1;
	*fileno = oi.fileno;
	memcpy(tok, &oi.addr, sizeof(oi.addr));
	return 0;
}

int tv_hardlink(hid_t loc, const char *src, const char *dst) {
	return H5Lcreate_hard(loc, src, loc, dst, H5P_DEFAULT, H5P_DEFAULT);
}

int tv_softlink(hid_t loc, const char *target, const char *dst) {
	return H5Lcreate_soft(target, loc, dst, H5P_DEFAULT, H5P_DEFAULT);
}

long tv_nattrs(hid_t loc, const char *path) {
	H5O_info_t oi;
	if (H5Oget_info_by_name2(loc, path, &oi, H5O_INFO_NUM_ATTRS, H5P_DEFAULT) < 0) return -1;
	return (long)oi.num_attrs;
}

char *tv_attr_name(hid_t loc, const char *path, hsize_t idx) {
	ssize_t n = H5Aget_name_by_idx(loc, path, H5_INDEX_NAME, H5_ITER_INC, idx, NULL, 0, H5P_DEFAULT);
	if (n < 0) return NULL;
	char *s = malloc((size_t)n + 1);
	if (!s) return NULL;
	if (H5Aget_name_by_idx(loc, path, H5_INDEX_NAME, H5_ITER_INC, idx, s, (size_t)n + 1, H5P_DEFAULT) < 0) {
		free(s);
		return NULL;
	}
	return s;
}

static int fill_info(hid_t type, hid_t space, tv_info *out) {
	memset(out, 0, sizeof(*out));
	H5T_class_t c = H5Tget_class(type);
	switch (c) {
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
	int r = H5Sget_simple_extent_ndims(space);
	if (r < 0 || r > TV_MAXRANK) return -1;
	out->rank = r;
	if (r > 0 && H5Sget_simple_extent_dims(space, out->dims, out->maxdims) < 0) return -1;
	return 0;
}

int tv_attr_info(hid_t loc, const char *path, const char *name, tv_info *out) {
	hid_t a = H5Aopen_by_name(loc, path, name, H5P_DEFAULT, H5P_DEFAULT);
	if (a < 0) return -1;
	hid_t t = H5Aget_type(a), s = H5Aget_space(a);
	int rc = (t < 0 || s < 0) ? -1 : fill_info(t, s, out);
	if (t >= 0) H5Tclose(t);
	if (s >= 0) H5Sclose(s);
	H5Aclose(a);
	return rc;
}

int tv_attr_read(hid_t loc, const char *path, const char *name, int memcode, void *buf) {
	hid_t a = H5Aopen_by_name(loc, path, name, H5P_DEFAULT, H5P_DEFAULT);
	if (a < 0) return -1;
	int rc = H5Aread(a, tv_memtype(memcode), buf) < 0 ? -1 : 0;
	H5Aclose(a);
	return rc;
}

// pack_strings returns n strings as one malloc'ed buffer of NUL-terminated
// pieces; the Go side splits it.
static char *pack_fixed(const char *raw, size_t size, hssize_t n, size_t *total) {
	char *out = malloc((size_t)n * (size + 1) + 1);
	if (!out) return NULL;
	size_t k = 0;
	for (hssize_t i = 0; i < n; i++) {
		const char *p = raw + (size_t)i * size;
		size_t l = strnlen(p, size);
		while (l > 0 && p[l - 1] == ' ') l--; // space-padded strings
		memcpy(out + k, p, l);
		k += l;
		out[k++] = 0;
	}
	*total = k;
	return out;
}

static char *pack_vlen(char **raw, hssize_t n, size_t *total) {
	size_t need = 1;
	for (hssize_t i = 0; i < n; i++) need += (raw[i] ? strlen(raw[i]) : 0) + 1;
	char *out = malloc(need);
	if (!out) return NULL;
	size_t k = 0;
	for (hssize_t i = 0; i < n; i++) {
		size_t l = raw[i] ? strlen(raw[i]) : 0;
		if (l) memcpy(out + k, raw[i], l);
		k += l;
		out[k++] = 0;
	}
	*total = k;
	return out;
}

// read_strings reads a string attribute (isattr) or dataset into a packed buffer.
static char *read_strings(hid_t obj, int isattr, size_t *total) {
	char *out = NULL;
	hid_t ft = isattr ? H5Aget_type(obj) : H5Dget_type(obj);
	hid_t sp = isattr ? H5Aget_space(obj) : H5Dget_space(obj);
	hid_t mt = -1;
	if (ft < 0 || sp < 0 || H5Tget_class(ft) != H5T_STRING) goto done;
	hssize_t n = H5Sget_simple_extent_npoints(sp);
	if (n < 0) goto done;
	mt = H5Tcopy(H5T_C_S1);
	if (H5Tis_variable_str(ft) > 0) {
		H5Tset_size(mt, H5T_VARIABLE);
		H5Tset_cset(mt, H5Tget_cset(ft));
		char **raw = calloc((size_t)n + 1, sizeof(char *));
		if (!raw) goto done;
		herr_t e = isattr ? H5Aread(obj, mt, raw) : H5Dread(obj, mt, H5S_ALL, H5S_ALL, H5P_DEFAULT, raw);
		if (e >= 0) {
			out = pack_vlen(raw, n, total);
			H5Dvlen_reclaim(mt, sp, H5P_DEFAULT, raw);
		}
		free(raw);
	} else {
		size_t size = H5Tget_size(ft);
		H5Tset_size(mt, size);
		H5Tset_cset(mt, H5Tget_cset(ft));
		H5Tset_strpad(mt, H5T_STR_NULLPAD);
		char *raw = calloc((size_t)n * size + 1, 1);
		if (!raw) goto done;
		herr_t e = isattr ? H5Aread(obj, mt, raw) : H5Dread(obj, mt, H5S_ALL, H5S_ALL, H5P_DEFAULT, raw);
		if (e >= 0) out = pack_fixed(raw, size, n, total);
		free(raw);
	}
done:
	if (mt >= 0) H5Tclose(mt);
	if (ft >= 0) H5Tclose(ft);
	if (sp >= 0) H5Sclose(sp);
	return out;
}

char *tv_attr_read_strings(hid_t loc, const char *path, const char *name, size_t *total) {
	hid_t a = H5Aopen_by_name(loc, path, name, H5P_DEFAULT, H5P_DEFAULT);
	if (a < 0) return NULL;
	char *out = read_strings(a, 1, total);
	H5Aclose(a);
	return out;
}

static hid_t make_space(int rank, const hsize_t *dims, const hsize_t *maxdims) {
	if (rank == 0) return H5Screate(H5S_SCALAR);
	return H5Screate_simple(rank, dims, maxdims);
}

static int drop_attr(hid_t loc, const char *path, const char *name) {
	htri_t ex = H5Aexists_by_name(loc, path, name, H5P_DEFAULT);
	if (ex < 0) return -1;
	if (ex > 0 && H5Adelete_by_name(loc, path, name, H5P_DEFAULT) < 0) return -1;
	return 0;
}

int tv_attr_write(hid_t loc, const char *path, const char *name, int filecode, int memcode,
                  int rank, const hsize_t *dims, const void *buf) {
	if (drop_attr(loc, path, name) < 0) return -1;
	hid_t s = make_space(rank, dims, NULL);
	if (s < 0) return -1;
	hid_t a = H5Acreate_by_name(loc, path, name, tv_filetype(filecode), s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
	int rc = -1;
	if (a >= 0) {
		rc = H5Awrite(a, tv_memtype(memcode), buf) < 0 ? -1 : 0;
		H5Aclose(a);
	}
	H5Sclose(s);
	return rc;
}

// string_type builds a string type: variable length, or fixed length
// sized to the longest of the n packed strings (NUL-terminated). The
// character set is ASCII when every byte is ASCII (the H5MD units module
// asks for ASCII), UTF-8 otherwise.
static hid_t string_type(const char *packed, int n, int vlen, const char ***ptrs, char **fixed) {
	hid_t t = H5Tcopy(H5T_C_S1);
	if (t < 0) return -1;
	const char **p = calloc((size_t)n + 1, sizeof(char *));
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
	H5Tset_cset(t, ascii ? H5T_CSET_ASCII : H5T_CSET_UTF8);
	if (vlen) {
		H5Tset_size(t, H5T_VARIABLE);
		*ptrs = p;
		*fixed = NULL;
		return t;
	}
	size_t size = maxl + 1;
	H5Tset_size(t, size);
	H5Tset_strpad(t, H5T_STR_NULLTERM);
	char *f = calloc((size_t)n * size + 1, 1);
	for (int i = 0; i < n; i++) memcpy(f + (size_t)i * size, p[i], strlen(p[i]));
	free(p);
	*ptrs = NULL;
	*fixed = f;
	return t;
}

int tv_attr_write_strings(hid_t loc, const char *path, const char *name, const char *packed,
                          int n, int rank, int vlen) {
	if (drop_attr(loc, path, name) < 0) return -1;
	const char **ptrs = NULL;
	char *fixed = NULL;
	hid_t t = string_type(packed, n, vlen, &ptrs, &fixed);
	if (t < 0) return -1;
	hsize_t dims[1] = {(hsize_t)n};
	hid_t s = make_space(rank, dims, NULL);
	int rc = -1;
	if (s >= 0) {
		hid_t a = H5Acreate_by_name(loc, path, name, t, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
		if (a >= 0) {
			rc = H5Awrite(a, t, vlen ? (const void *)ptrs : (const void *)fixed) < 0 ? -1 : 0;
			H5Aclose(a);
		}
		H5Sclose(s);
	}
	H5Tclose(t);
	free(ptrs);
	free(fixed);
	return rc;
}

hid_t tv_dset_create(hid_t loc, const char *path, int filecode, int rank, const hsize_t *dims,
                     const hsize_t *maxdims, const hsize_t *chunk, const tv_filters *f) {
	hid_t s = make_space(rank, dims, maxdims);
	if (s < 0) return -1;
	hid_t dcpl = H5Pcreate(H5P_DATASET_CREATE);
	hid_t lcpl = H5Pcreate(H5P_LINK_CREATE);
	hid_t d = -1;
	if (dcpl < 0 || lcpl < 0) goto done;
	H5Pset_create_intermediate_group(lcpl, 1);
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
	d = H5Dcreate2(loc, path, tv_filetype(filecode), s, lcpl, dcpl, H5P_DEFAULT);
done:
	if (dcpl >= 0) H5Pclose(dcpl);
	if (lcpl >= 0) H5Pclose(lcpl);
	H5Sclose(s);
	return d;
}

hid_t tv_dset_create_strings(hid_t loc, const char *path, const char *packed, int n, int vlen) {
	const char **ptrs = NULL;
	char *fixed = NULL;
	hid_t t = string_type(packed, n, vlen, &ptrs, &fixed);
	if (t < 0) return -1;
	hsize_t dims[1] = {(hsize_t)n};
	hid_t s = H5Screate_simple(1, dims, NULL);
	hid_t lcpl = H5Pcreate(H5P_LINK_CREATE);
	H5Pset_create_intermediate_group(lcpl, 1);
	hid_t d = -1;
	if (s >= 0) {
		d = H5Dcreate2(loc, path, t, s, lcpl, H5P_DEFAULT, H5P_DEFAULT);
		if (d >= 0 && H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, vlen ? (const void *)ptrs : (const void *)fixed) < 0) {
			H5Dclose(d);
			d = -1;
		}
		H5Sclose(s);
	}
	H5Pclose(lcpl);
	H5Tclose(t);
	free(ptrs);
	free(fixed);
	return d;
}

hid_t tv_dset_open(hid_t loc, const char *path) { return H5Dopen2(loc, path, H5P_DEFAULT); }
int tv_dset_close(hid_t d) { return H5Dclose(d); }

int tv_dset_append(hid_t d, int memcode, hsize_t rows, const void *buf) {
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
	if (H5Dset_extent(d, dims) < 0) goto done;
	H5Sclose(fs);
	fs = H5Dget_space(d);
	if (fs < 0) goto done;
	if (H5Sselect_hyperslab(fs, H5S_SELECT_SET, start, NULL, count, NULL) < 0) goto done;
	ms = H5Screate_simple(rank, count, NULL);
	if (ms < 0) goto done;
	rc = H5Dwrite(d, tv_memtype(memcode), ms, fs, H5P_DEFAULT, buf) < 0 ? -1 : 0;
done:
	if (ms >= 0) H5Sclose(ms);
	if (fs >= 0) H5Sclose(fs);
	return rc;
}

int tv_dset_write(hid_t d, int memcode, const void *buf) {
	return H5Dwrite(d, tv_memtype(memcode), H5S_ALL, H5S_ALL, H5P_DEFAULT, buf) < 0 ? -1 : 0;
}

int tv_dset_info(hid_t loc, const char *path, tv_info *t, tv_storage *st) {
	hid_t d = H5Dopen2(loc, path, H5P_DEFAULT);
	if (d < 0) return -1;
	hid_t ty = H5Dget_type(d), sp = H5Dget_space(d), pl = H5Dget_create_plist(d);
	int rc = -1;
	if (ty < 0 || sp < 0 || pl < 0) goto done;
	if (fill_info(ty, sp, t) < 0) goto done;
	memset(st, 0, sizeof(*st));
	switch (H5Pget_layout(pl)) {
	case H5D_COMPACT: st->layout = 0; break;
	case H5D_CONTIGUOUS: st->layout = 1; break;
	case H5D_CHUNKED:
		st->layout = 2;
		if (H5Pget_chunk(pl, TV_MAXRANK, st->chunk) < 0) goto done;
		break;
	default: st->layout = -1;
	}
	st->nfilters = H5Pget_nfilters(pl);
	st->storage = (unsigned long long)H5Dget_storage_size(d);
	rc = 0;
done:
	if (ty >= 0) H5Tclose(ty);
	if (sp >= 0) H5Sclose(sp);
	if (pl >= 0) H5Pclose(pl);
	H5Dclose(d);
	return rc;
}

int tv_dset_filter(hid_t loc, const char *path, int idx, unsigned *id, char *name, size_t namelen,
                   unsigned *cd, size_t *ncd) {
	hid_t d = H5Dopen2(loc, path, H5P_DEFAULT);
	if (d < 0) return -1;
	hid_t pl = H5Dget_create_plist(d);
	int rc = -1;
	if (pl >= 0) {
		unsigned flags = 0, conf = 0;
		H5Z_filter_t f = H5Pget_filter2(pl, (unsigned)idx, &flags, ncd, cd, namelen, name, &conf);
		if (f >= 0) { *id = (unsigned)f; rc = 0; }
		H5Pclose(pl);
	}
	H5Dclose(d);
	return rc;
}

int tv_dset_read(hid_t loc, const char *path, int memcode, int rank, const hsize_t *start,
                 const hsize_t *count, void *buf) {
	hid_t d = H5Dopen2(loc, path, H5P_DEFAULT);
	if (d < 0) return -1;
	int rc = -1;
	hid_t fs = -1, ms = -1;
	if (start == NULL) {
		rc = H5Dread(d, tv_memtype(memcode), H5S_ALL, H5S_ALL, H5P_DEFAULT, buf) < 0 ? -1 : 0;
		goto done;
	}
	fs = H5Dget_space(d);
	if (fs < 0 || H5Sselect_hyperslab(fs, H5S_SELECT_SET, start, NULL, count, NULL) < 0) goto done;
	ms = H5Screate_simple(rank, count, NULL);
	if (ms < 0) goto done;
	rc = H5Dread(d, tv_memtype(memcode), ms, fs, H5P_DEFAULT, buf) < 0 ? -1 : 0;
done:
	if (ms >= 0) H5Sclose(ms);
	if (fs >= 0) H5Sclose(fs);
	H5Dclose(d);
	return rc;
}

char *tv_dset_read_strings(hid_t loc, const char *path, size_t *total) {
	hid_t d = H5Dopen2(loc, path, H5P_DEFAULT);
	if (d < 0) return NULL;
	char *out = read_strings(d, 0, total);
	H5Dclose(d);
	return out;
}

int tv_delete_link(hid_t loc, const char *path) { return H5Ldelete(loc, path, H5P_DEFAULT); }
int tv_delete_attr(hid_t loc, const char *path, const char *name) {
	return H5Adelete_by_name(loc, path, name, H5P_DEFAULT);
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
	f = H5Fcreate(path, H5F_ACC_EXCL, fcpl, fapl);
done:
	if (fapl >= 0) H5Pclose(fapl);
	if (fcpl >= 0) H5Pclose(fcpl);
	return f;
}

int tv_close_file(hid_t f) { return H5Fclose(f); }

int tv_group_create(hid_t loc, const char *path) {
	hid_t g = H5Gcreate2(loc, path, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
	if (g < 0) return -1;
	return H5Gclose(g);
}

// tv_open_image opens an HDF5 file held in memory, read-only (the
// library copies nothing: the caller keeps buf alive until close).
hid_t tv_open_image(void *buf, size_t size) {
	return H5LTopen_file_image(buf, size, H5LT_FILE_IMAGE_DONT_COPY | H5LT_FILE_IMAGE_DONT_RELEASE);
}
