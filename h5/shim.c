#include "shim.h"
#include <libdeflate.h>
#include <stdio.h>

/* The error stack is cleared by the next library call (even a close), so
 * failures are captured where they happen, before any clean-up. */
static __thread char last_error[2048];
static herr_t walk_cb(unsigned n, const H5E_error2_t *e, void *data);
typedef struct { char *buf; size_t cap; size_t len; } errbuf;
static void capture(void) {
    errbuf b = {last_error, sizeof last_error, 0};
    last_error[0] = 0;
    H5Ewalk2(H5E_DEFAULT, H5E_WALK_UPWARD, walk_cb, &b);
}
#define FAIL_IF(cond) do { if (cond) { capture(); goto done; } } while (0)

/* Turns off error printing for the calling thread, once per thread. */
void muarc_quiet(void) {
    static __thread int done;
    if (!done) {
        H5Eset_auto2(H5E_DEFAULT, NULL, NULL);
        done = 1;
    }
}

hid_t muarc_vlen_utf8(void) {
    hid_t t = H5Tcopy(H5T_C_S1);
    if (t < 0) return t;
    if (H5Tset_size(t, H5T_VARIABLE) < 0 || H5Tset_cset(t, H5T_CSET_UTF8) < 0) {
        H5Tclose(t);
        return -1;
    }
    return t;
}

hid_t muarc_group_create(hid_t loc, const char *name) {
    hid_t gcpl = H5Pcreate(H5P_GROUP_CREATE);
    if (gcpl < 0) return gcpl;
    if (H5Pset_link_creation_order(gcpl, H5P_CRT_ORDER_TRACKED | H5P_CRT_ORDER_INDEXED) < 0) {
        H5Pclose(gcpl);
        return -1;
    }
    hid_t g = H5Gcreate2(loc, name, H5P_DEFAULT, gcpl, H5P_DEFAULT);
    H5Pclose(gcpl);
    return g;
}

/* Lists a group's links in creation order when tracked, else by name.
 * kinds: 0 group, 1 dataset, 2 other or dangling. */
int muarc_group_children(hid_t g, char ***names, int **kinds, hsize_t *n) {
    H5G_info_t info;
    if (H5Gget_info(g, &info) < 0) return -1;
    *n = info.nlinks;
    *names = calloc(info.nlinks ? info.nlinks : 1, sizeof(char *));
    *kinds = calloc(info.nlinks ? info.nlinks : 1, sizeof(int));
    if (!*names || !*kinds) return -1;
    H5_index_t idx = H5_INDEX_CRT_ORDER;
    hid_t gcpl = H5Gget_create_plist(g);
    unsigned flags = 0;
    if (gcpl < 0 || H5Pget_link_creation_order(gcpl, &flags) < 0 || !(flags & H5P_CRT_ORDER_INDEXED)) idx = H5_INDEX_NAME;
    if (gcpl >= 0) H5Pclose(gcpl);
    for (hsize_t i = 0; i < info.nlinks; i++) {
        ssize_t len = H5Lget_name_by_idx(g, ".", idx, H5_ITER_INC, i, NULL, 0, H5P_DEFAULT);
        if (len < 0) return -1;
        (*names)[i] = malloc((size_t)len + 1);
        if (!(*names)[i]) return -1;
        if (H5Lget_name_by_idx(g, ".", idx, H5_ITER_INC, i, (*names)[i], (size_t)len + 1, H5P_DEFAULT) < 0) return -1;
        H5O_info_t oi;
        (*kinds)[i] = 2;
        if (H5Oget_info_by_name2(g, (*names)[i], &oi, H5O_INFO_BASIC, H5P_DEFAULT) >= 0) {
            if (oi.type == H5O_TYPE_GROUP) (*kinds)[i] = 0;
            else if (oi.type == H5O_TYPE_DATASET) (*kinds)[i] = 1;
        }
    }
    return 0;
}

int muarc_attr_write(hid_t loc, const char *name, hid_t mem, hid_t file, int rank, hsize_t n, const void *buf) {
    hid_t s = rank == 0 ? H5Screate(H5S_SCALAR) : H5Screate_simple(1, &n, NULL);
    if (s < 0) return -1;
    if (H5Aexists(loc, name) > 0) H5Adelete(loc, name);
    hid_t a = H5Acreate2(loc, name, file, s, H5P_DEFAULT, H5P_DEFAULT);
    if (a < 0) capture();
    H5Sclose(s);
    if (a < 0) return -1;
    herr_t r = H5Awrite(a, mem, buf);
    if (r < 0) capture();
    H5Aclose(a);
    return r < 0 ? -1 : 0;
}

int muarc_attr_write_str(hid_t loc, const char *name, const char *val) {
    hid_t t = muarc_vlen_utf8();
    if (t < 0) return -1;
    int r = muarc_attr_write(loc, name, t, t, 0, 1, &val);
    H5Tclose(t);
    return r;
}

int muarc_attr_count(hid_t loc, hsize_t *n) {
    H5O_info_t oi;
    if (H5Oget_info2(loc, &oi, H5O_INFO_NUM_ATTRS) < 0) return -1;
    *n = oi.num_attrs;
    return 0;
}

hid_t muarc_attr_open_idx(hid_t loc, hsize_t idx) {
    return H5Aopen_by_idx(loc, ".", H5_INDEX_NAME, H5_ITER_INC, idx, H5P_DEFAULT, H5P_DEFAULT);
}

int muarc_type_info(hid_t type, int *cls, size_t *size, int *sign, int *vlen_str) {
    H5T_class_t c = H5Tget_class(type);
    if (c < 0) return -1;
    *cls = (int)c;
    *size = H5Tget_size(type);
    *sign = c == H5T_INTEGER ? (int)H5Tget_sign(type) : 0;
    *vlen_str = c == H5T_STRING ? H5Tis_variable_str(type) > 0 : 0;
    return 0;
}

/* dims and maxdims must hold 32 entries. maxdims uses H5S_UNLIMITED. */
int muarc_space_info(hid_t space, int *rank, hsize_t *dims, hsize_t *maxdims) {
    int r = H5Sget_simple_extent_ndims(space);
    if (r < 0 || r > 32) return -1;
    *rank = r;
    if (r > 0 && H5Sget_simple_extent_dims(space, dims, maxdims) < 0) return -1;
    return 0;
}

int muarc_attr_read(hid_t attr, hid_t mem, void *buf) { return H5Aread(attr, mem, buf) < 0 ? -1 : 0; }

static int read_strs(hid_t obj, int is_attr, char ***out, hsize_t *n) {
    hid_t ft = is_attr ? H5Aget_type(obj) : H5Dget_type(obj);
    hid_t sp = is_attr ? H5Aget_space(obj) : H5Dget_space(obj);
    int rc = -1;
    *out = NULL;
    *n = 0;
    if (ft < 0 || sp < 0) goto done;
    hssize_t np = H5Sget_simple_extent_npoints(sp);
    if (np < 0) goto done;
    *n = (hsize_t)np;
    *out = calloc(np ? (size_t)np : 1, sizeof(char *));
    if (!*out) goto done;
    if (np == 0) { rc = 0; goto done; }
    if (H5Tis_variable_str(ft) > 0) {
        hid_t mt = muarc_vlen_utf8();
        herr_t r = is_attr ? H5Aread(obj, mt, *out) : H5Dread(obj, mt, H5S_ALL, H5S_ALL, H5P_DEFAULT, *out);
        if (r < 0) capture();
        H5Tclose(mt);
        if (r < 0) goto done;
        /* Copy into malloc'd memory we own, then release HDF5's. */
        for (hssize_t i = 0; i < np; i++) {
            char *s = (*out)[i];
            char *c = strdup(s ? s : "");
            if (s) H5free_memory(s);
            (*out)[i] = c;
        }
    } else {
        size_t sz = H5Tget_size(ft);
        char *raw = calloc((size_t)np, sz + 1);
        if (!raw) goto done;
        hid_t mt = H5Tcopy(ft);
        herr_t r = is_attr ? H5Aread(obj, mt, raw) : H5Dread(obj, mt, H5S_ALL, H5S_ALL, H5P_DEFAULT, raw);
        if (r < 0) capture();
        H5Tclose(mt);
        if (r < 0) { free(raw); goto done; }
        for (hssize_t i = 0; i < np; i++) {
            char *c = calloc(sz + 1, 1);
            memcpy(c, raw + (size_t)i * sz, sz);
            (*out)[i] = c;
        }
        free(raw);
    }
    rc = 0;
done:
    if (ft >= 0) H5Tclose(ft);
    if (sp >= 0) H5Sclose(sp);
    return rc;
}

int muarc_attr_read_strs(hid_t attr, char ***out, hsize_t *n) { return read_strs(attr, 1, out, n); }
int muarc_dset_read_strs(hid_t d, char ***out, hsize_t *n) { return read_strs(d, 0, out, n); }

void muarc_free_strs(char **s, hsize_t n) {
    if (!s) return;
    for (hsize_t i = 0; i < n; i++) free(s[i]);
    free(s);
}

int muarc_dset_write_strs(hid_t loc, const char *name, const char **vals, hsize_t n) {
    hid_t t = muarc_vlen_utf8();
    hid_t s = H5Screate_simple(1, &n, NULL);
    int rc = -1;
    if (t < 0 || s < 0) goto done;
    hid_t d = H5Dcreate2(loc, name, t, s, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    if (d < 0) goto done;
    rc = (n == 0 || H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, vals) >= 0) ? 0 : -1;
    if (rc < 0) capture();
    H5Dclose(d);
done:
    if (t >= 0) H5Tclose(t);
    if (s >= 0) H5Sclose(s);
    return rc;
}

hid_t muarc_dset_create(hid_t loc, const char *name, hid_t type, int rank, const hsize_t *dims,
                        const hsize_t *maxdims, const hsize_t *chunk, int shuffle, int deflate, int fletcher) {
    hid_t s = H5Screate_simple(rank, dims, maxdims);
    hid_t p = H5Pcreate(H5P_DATASET_CREATE);
    hid_t d = -1;
    FAIL_IF(s < 0 || p < 0);
    if (chunk) {
        FAIL_IF(H5Pset_chunk(p, rank, chunk) < 0);
        /* Pipeline order matters: readers undo it in reverse, so the
         * checksum covers the bytes as stored. */
        FAIL_IF(shuffle && H5Pset_shuffle(p) < 0);
        FAIL_IF(deflate > 0 && H5Pset_deflate(p, (unsigned)deflate) < 0);
        FAIL_IF(fletcher && H5Pset_fletcher32(p) < 0);
        /* Never spend time writing fill values for chunks we write whole. */
        FAIL_IF(H5Pset_fill_time(p, H5D_FILL_TIME_NEVER) < 0);
        FAIL_IF(H5Pset_alloc_time(p, H5D_ALLOC_TIME_INCR) < 0);
    }
    d = H5Dcreate2(loc, name, type, s, H5P_DEFAULT, p, H5P_DEFAULT);
    if (d < 0) capture();
done:
    if (s >= 0) H5Sclose(s);
    if (p >= 0) H5Pclose(p);
    return d;
}

int muarc_dset_extend(hid_t d, int rank, const hsize_t *dims) { (void)rank; return H5Dset_extent(d, dims) < 0 ? -1 : 0; }

int muarc_dset_write_all(hid_t d, hid_t mem, const void *buf) {
    return H5Dwrite(d, mem, H5S_ALL, H5S_ALL, H5P_DEFAULT, buf) < 0 ? -1 : 0;
}

int muarc_dset_rw_slab(hid_t d, hid_t mem, int rank, const hsize_t *start, const hsize_t *count, void *buf, int write) {
    hid_t fs = H5Dget_space(d);
    hid_t ms = H5Screate_simple(rank, count, NULL);
    int rc = -1;
    FAIL_IF(fs < 0 || ms < 0);
    FAIL_IF(H5Sselect_hyperslab(fs, H5S_SELECT_SET, start, NULL, count, NULL) < 0);
    if (write) FAIL_IF(H5Dwrite(d, mem, ms, fs, H5P_DEFAULT, buf) < 0);
    else FAIL_IF(H5Dread(d, mem, ms, fs, H5P_DEFAULT, buf) < 0);
    rc = 0;
done:
    if (fs >= 0) H5Sclose(fs);
    if (ms >= 0) H5Sclose(ms);
    return rc;
}

int muarc_chunk_write(hid_t d, const hsize_t *offset, size_t size, const void *buf) {
    return H5Dwrite_chunk(d, H5P_DEFAULT, 0, offset, size, buf) < 0 ? -1 : 0;
}

int muarc_chunk_count(hid_t d, hsize_t *n) {
    hid_t s = H5Dget_space(d);
    if (s < 0) return -1;
    herr_t r = H5Dget_num_chunks(d, s, n);
    if (r < 0) capture();
    H5Sclose(s);
    return r < 0 ? -1 : 0;
}

int muarc_chunk_info(hid_t d, hsize_t idx, hsize_t *offset, unsigned *mask, haddr_t *addr, hsize_t *size) {
    hid_t s = H5Dget_space(d);
    if (s < 0) return -1;
    herr_t r = H5Dget_chunk_info(d, s, idx, offset, mask, addr, size);
    if (r < 0) capture();
    H5Sclose(s);
    return r < 0 ? -1 : 0;
}

int muarc_chunk_read(hid_t d, const hsize_t *offset, unsigned *mask, void *buf) {
    uint32_t m = 0;
    herr_t r = H5Dread_chunk(d, H5P_DEFAULT, offset, &m, buf);
    *mask = m;
    return r < 0 ? -1 : 0;
}

/* filters must hold 16 entries: H5Z filter ids in pipeline order. */
int muarc_dset_layout(hid_t d, int *chunked, int *rank, hsize_t *chunk, int *nfilters, int *filters) {
    hid_t p = H5Dget_create_plist(d);
    if (p < 0) return -1;
    *chunked = H5Pget_layout(p) == H5D_CHUNKED;
    *rank = 0;
    *nfilters = 0;
    if (*chunked) {
        *rank = H5Pget_chunk(p, 32, chunk);
        int nf = H5Pget_nfilters(p);
        if (nf > 16) nf = 16;
        for (int i = 0; i < nf; i++) {
            unsigned flags, cd[8];
            size_t ncd = 8;
            char name[64];
            unsigned conf;
            filters[i] = (int)H5Pget_filter2(p, (unsigned)i, &flags, &ncd, cd, sizeof name, name, &conf);
        }
        *nfilters = nf < 0 ? 0 : nf;
    }
    H5Pclose(p);
    return 0;
}

/* zlib-format streams (RFC 1950 around RFC 1951), which the HDF5 deflate
 * filter reads, made by libdeflate: about twice zlib's speed at a slightly
 * better ratio on shuffled samples. One compressor per worker thread. */
void *muarc_compressor_new(int level) { return libdeflate_alloc_compressor(level); }
void muarc_compressor_free(void *c) { libdeflate_free_compressor(c); }

int muarc_deflate(void *c, const void *src, size_t n, void *dst, size_t *dn) {
    size_t out = libdeflate_zlib_compress(c, src, n, dst, *dn);
    if (out == 0) return -1;
    *dn = out;
    return 0;
}

size_t muarc_deflate_bound(void *c, size_t n) { return libdeflate_zlib_compress_bound(c, n); }

static herr_t walk_cb(unsigned n, const H5E_error2_t *e, void *data) {
    errbuf *b = data;
    (void)n;
    if (!e->desc || !*e->desc || b->len + 3 >= b->cap) return 0;
    int w = snprintf(b->buf + b->len, b->cap - b->len, "%s%s", b->len ? "; " : "", e->desc);
    if (w > 0) b->len += (size_t)w < b->cap - b->len ? (size_t)w : b->cap - b->len - 1;
    return 0;
}

/* The current error stack's descriptions, innermost first; clears it. */
void muarc_error_text(char *buf, size_t cap) {
    errbuf b = {buf, cap, 0};
    if (cap) buf[0] = 0;
    H5Ewalk2(H5E_DEFAULT, H5E_WALK_UPWARD, walk_cb, &b);
    H5Eclear2(H5E_DEFAULT);
    if (b.len == 0 && cap) snprintf(buf, cap, "%s", last_error);
    last_error[0] = 0;
}

/* Booleans as h5py stores numpy.bool_: an enum over int8, FALSE=0, TRUE=1. */
hid_t muarc_bool_type(void) {
    hid_t t = H5Tenum_create(H5T_NATIVE_INT8);
    int8_t f = 0, tr = 1;
    H5Tenum_insert(t, "FALSE", &f);
    H5Tenum_insert(t, "TRUE", &tr);
    return t;
}

int muarc_is_bool_enum(hid_t t) {
    if (H5Tget_class(t) != H5T_ENUM || H5Tget_nmembers(t) != 2 || H5Tget_size(t) != 1) return 0;
    char *a = H5Tget_member_name(t, 0), *b = H5Tget_member_name(t, 1);
    int ok = a && b && strcmp(a, "FALSE") == 0 && strcmp(b, "TRUE") == 0;
    if (a) H5free_memory(a);
    if (b) H5free_memory(b);
    return ok;
}

void *muarc_decompressor_new(void) { return libdeflate_alloc_decompressor(); }
void muarc_decompressor_free(void *d) { libdeflate_free_decompressor(d); }

/* Inflates a zlib stream that must decode to exactly want bytes. */
int muarc_inflate(void *d, const void *src, size_t n, void *dst, size_t want) {
    size_t got = 0;
    enum libdeflate_result r = libdeflate_zlib_decompress(d, src, n, dst, want, &got);
    return (r == LIBDEFLATE_SUCCESS && got == want) ? 0 : -1;
}

/* Stored size of the chunk at offset; 0 when the chunk was never written. */
int muarc_chunk_size(hid_t d, const hsize_t *offset, hsize_t *size) {
    H5E_BEGIN_TRY { if (H5Dget_chunk_storage_size(d, offset, size) < 0) *size = 0; } H5E_END_TRY;
    return 0;
}

/* The deflate level (client data 0) of a dataset's deflate filter; -1 when
 * it has none. */
int muarc_deflate_level(hid_t d, int *level) {
    hid_t p = H5Dget_create_plist(d);
    if (p < 0) return -1;
    *level = -1;
    unsigned flags, cd[8];
    size_t ncd = 8;
    char name[64];
    unsigned conf;
    H5E_BEGIN_TRY {
        if (H5Pget_filter_by_id2(p, H5Z_FILTER_DEFLATE, &flags, &ncd, cd, sizeof name, name, &conf) >= 0 && ncd >= 1)
            *level = (int)cd[0];
    } H5E_END_TRY;
    H5Pclose(p);
    return 0;
}
