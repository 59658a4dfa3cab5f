/* Thin C helpers for the calls the Go binding lacks: UTF-8 string
 * attributes and datasets, creation-ordered groups, filtered chunked
 * datasets, direct chunk I/O, attribute and filter introspection and error
 * text. Every function returns a negative value on failure. */
#ifndef MUARC_H5_SHIM_H
#define MUARC_H5_SHIM_H
#include <hdf5.h>
#include <stdlib.h>
#include <string.h>

hid_t muarc_vlen_utf8(void);
hid_t muarc_group_create(hid_t loc, const char *name);
int muarc_group_children(hid_t g, char ***names, int **kinds, hsize_t *n);
int muarc_attr_write(hid_t loc, const char *name, hid_t mem, hid_t file, int rank, hsize_t n, const void *buf);
int muarc_attr_write_str(hid_t loc, const char *name, const char *val);
int muarc_attr_count(hid_t loc, hsize_t *n);
hid_t muarc_attr_open_idx(hid_t loc, hsize_t idx);
int muarc_type_info(hid_t type, int *cls, size_t *size, int *sign, int *vlen_str);
int muarc_space_info(hid_t space, int *rank, hsize_t *dims, hsize_t *maxdims);
int muarc_attr_read(hid_t attr, hid_t mem, void *buf);
int muarc_attr_read_strs(hid_t attr, char ***out, hsize_t *n);
int muarc_dset_write_strs(hid_t loc, const char *name, const char **vals, hsize_t n);
int muarc_dset_read_strs(hid_t d, char ***out, hsize_t *n);
void muarc_free_strs(char **s, hsize_t n);
hid_t muarc_dset_create(hid_t loc, const char *name, hid_t type, int rank, const hsize_t *dims,
                        const hsize_t *maxdims, const hsize_t *chunk, int shuffle, int deflate, int fletcher);
int muarc_dset_extend(hid_t d, int rank, const hsize_t *dims);
int muarc_dset_write_all(hid_t d, hid_t mem, const void *buf);
int muarc_dset_rw_slab(hid_t d, hid_t mem, int rank, const hsize_t *start, const hsize_t *count, void *buf, int write);
int muarc_chunk_write(hid_t d, const hsize_t *offset, size_t size, const void *buf);
int muarc_chunk_count(hid_t d, hsize_t *n);
int muarc_chunk_info(hid_t d, hsize_t idx, hsize_t *offset, unsigned *mask, haddr_t *addr, hsize_t *size);
int muarc_chunk_read(hid_t d, const hsize_t *offset, unsigned *mask, void *buf);
int muarc_dset_layout(hid_t d, int *chunked, int *rank, hsize_t *chunk, int *nfilters, int *filters);
void *muarc_compressor_new(int level);
void muarc_compressor_free(void *c);
int muarc_deflate(void *c, const void *src, size_t n, void *dst, size_t *dn);
size_t muarc_deflate_bound(void *c, size_t n);
void muarc_error_text(char *buf, size_t cap);
void muarc_quiet(void);
#endif
hid_t muarc_bool_type(void);
int muarc_is_bool_enum(hid_t t);
void *muarc_decompressor_new(void);
void muarc_decompressor_free(void *d);
int muarc_inflate(void *d, const void *src, size_t n, void *dst, size_t want);
int muarc_chunk_size(hid_t d, const hsize_t *offset, hsize_t *size);
int muarc_deflate_level(hid_t d, int *level);
