/* SPDX-License-Identifier: GPL-3.0-or-later */
/*
 * CSV reader: long and wide layouts, RFC 4180 quoting, CRLF or LF line
 * ends, a UTF-8 byte-order mark, gzip (zlib, detected by the magic bytes
 * 1f 8b, several members allowed), from a path, a file descriptor or
 * memory.
 *
 * One pass over a streaming buffer.  The tokenizer never writes into the
 * buffer while a record may still be incomplete, so a record cut by the
 * end of the buffer is simply parsed again after the buffer is refilled.
 * Fields are (pointer, length) pairs into the buffer: no allocation per
 * field.  Regions are found through an open-addressing hash table (with a
 * one-entry cache for the usual file sorted by region).  Each region keeps
 * a growable dense window of days (values and the line each day came
 * from, 0 = not seen), so gaps cost no more than the days they span,
 * duplicates are found at once, and the arrays become the series' columns
 * without a copy.
 *
 * RFC 4180: Shafranovich Y (2005), Common Format and MIME Type for
 * Comma-Separated Values (CSV) Files, IETF.  gzip: RFC 1952; UTF-8:
 * RFC 3629 (the validity table of its section 4).
 */
#include "internal.h"
#include "series.h"

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <zlib.h>

/* ------------------------------------------------------------------ */
/* Options and layout names                                            */
/* ------------------------------------------------------------------ */

struct twofold_read_options {
  int layout;
  char *region; /* never NULL */
  char *date;   /* never NULL */
  char *count;  /* NULL: the first column that is neither region nor date */
  twofold_read_region_fn fn; /* called for regions left behind, or NULL */
  void *fn_arg;
};

const char *twofold_layout_to_string(int layout) {
  switch (layout) {
  case TWOFOLD_LAYOUT_AUTO:
    return "auto";
  case TWOFOLD_LAYOUT_LONG:
    return "long";
  case TWOFOLD_LAYOUT_WIDE:
    return "wide";
  default:
    return NULL;
  }
}

int twofold_layout_from_string(const char *name) {
  if (name == NULL)
    return TWOFOLD_EINVAL;
  for (int l = TWOFOLD_LAYOUT_AUTO; l <= TWOFOLD_LAYOUT_WIDE; l++)
    if (strcmp(name, twofold_layout_to_string(l)) == 0)
      return l;
  return TWOFOLD_EINVAL;
}

int twofold_read_options_new(twofold_read_options **out) {
  if (out == NULL)
    return TWOFOLD_EINVAL;
  twofold_read_options *o = calloc(1, sizeof *o);
  if (o == NULL) {
    *out = NULL;
    return TWOFOLD_ENOMEM;
  }
  o->layout = TWOFOLD_LAYOUT_AUTO;
  o->region = tf_strdup("region");
  o->date = tf_strdup("date");
  if (o->region == NULL || o->date == NULL) {
    twofold_read_options_free(o);
    *out = NULL;
    return TWOFOLD_ENOMEM;
  }
  *out = o;
  return TWOFOLD_OK;
}

void twofold_read_options_free(twofold_read_options *o) {
  if (o == NULL)
    return;
  free(o->region);
  free(o->date);
  free(o->count);
  free(o);
}

int twofold_read_options_set_layout(twofold_read_options *o, int layout) {
  if (o == NULL || twofold_layout_to_string(layout) == NULL)
    return TWOFOLD_EINVAL;
  o->layout = layout;
  return TWOFOLD_OK;
}

static int set_name(char **slot, const char *name, int may_be_null) {
  if (name == NULL) {
    if (!may_be_null)
      return TWOFOLD_EINVAL;
    free(*slot);
    *slot = NULL;
    return TWOFOLD_OK;
  }
  if (name[0] == '\0')
    return TWOFOLD_EINVAL;
  char *copy = tf_strdup(name);
  if (copy == NULL)
    return TWOFOLD_ENOMEM;
  free(*slot);
  *slot = copy;
  return TWOFOLD_OK;
}

int twofold_read_options_set_region_column(twofold_read_options *o,
                                           const char *name) {
  return o ? set_name(&o->region, name, 0) : TWOFOLD_EINVAL;
}

int twofold_read_options_set_date_column(twofold_read_options *o,
                                         const char *name) {
  return o ? set_name(&o->date, name, 0) : TWOFOLD_EINVAL;
}

int twofold_read_options_set_region_fn(twofold_read_options *o,
                                       twofold_read_region_fn fn,
                                       void *arg) {
  if (o == NULL)
    return TWOFOLD_EINVAL;
  o->fn = fn;
  o->fn_arg = arg;
  return TWOFOLD_OK;
}

int twofold_read_options_set_count_column(twofold_read_options *o,
                                          const char *name) {
  return o ? set_name(&o->count, name, 1) : TWOFOLD_EINVAL;
}

/* ------------------------------------------------------------------ */
/* Limits                                                              */
/* ------------------------------------------------------------------ */

#define BUF_INITIAL (256u * 1024u)
#define RAW_CHUNK (256u * 1024u)
#define DAY_RANGE ((size_t)(TWOFOLD_DAY_MAX - TWOFOLD_DAY_MIN + 1))

/* ------------------------------------------------------------------ */
/* Text helpers: UTF-8 and quoting values for messages                 */
/* ------------------------------------------------------------------ */

/* Length of the valid UTF-8 sequence at p[0..n-1] (RFC 3629, section 4),
 * or 0 if the bytes there are not one. */
static size_t utf8_seq(const unsigned char *p, size_t n) {
  unsigned c = p[0];
  if (c < 0x80)
    return 1;
  size_t k;
  unsigned lo = 0x80, hi = 0xbf;
  if (c >= 0xc2 && c <= 0xdf)
    k = 2;
  else if (c >= 0xe0 && c <= 0xef) {
    k = 3;
    if (c == 0xe0)
      lo = 0xa0;
    else if (c == 0xed)
      hi = 0x9f;
  } else if (c >= 0xf0 && c <= 0xf4) {
    k = 4;
    if (c == 0xf0)
      lo = 0x90;
    else if (c == 0xf4)
      hi = 0x8f;
  } else
    return 0;
  if (n < k)
    return 0;
  if (p[1] < lo || p[1] > hi)
    return 0;
  for (size_t i = 2; i < k; i++)
    if (p[i] < 0x80 || p[i] > 0xbf)
      return 0;
  return k;
}

static int utf8_ok(const unsigned char *p, size_t n) {
  size_t i = 0;
  while (i < n) {
    if (p[i] < 0x80) {
      i++;
      continue;
    }
    size_t k = utf8_seq(p + i, n - i);
    if (k == 0)
      return 0;
    i += k;
  }
  return 1;
}

/* Write p[0..n-1] into out (size >= 8) as a double-quoted string: valid
 * UTF-8 as it is, quotes and backslashes escaped, control and invalid
 * bytes as \xHH; cut at a character boundary with "..." when long. */
#define QUOTE_SIZE 96
static void quote(char *out, size_t size, const unsigned char *p, size_t n) {
  size_t o = 0, limit = size - 6; /* room for ...", quote and NUL */
  out[o++] = '"';
  size_t i = 0;
  while (i < n) {
    char tmp[8];
    size_t tl;
    size_t k = utf8_seq(p + i, n - i);
    unsigned c = p[i];
    if (k == 1 && (c == '"' || c == '\\')) {
      tmp[0] = '\\';
      tmp[1] = (char)c;
      tl = 2;
    } else if (k == 1 && c == '\n') {
      memcpy(tmp, "\\n", 2);
      tl = 2;
    } else if (k == 1 && c == '\r') {
      memcpy(tmp, "\\r", 2);
      tl = 2;
    } else if (k == 1 && c == '\t') {
      memcpy(tmp, "\\t", 2);
      tl = 2;
    } else if (k == 0 || (k == 1 && (c < 0x20 || c == 0x7f))) {
      static const char hex[] = "0123456789abcdef";
      tmp[0] = '\\';
      tmp[1] = 'x';
      tmp[2] = hex[c >> 4];
      tmp[3] = hex[c & 15];
      tl = 4;
      k = 1;
    } else {
      memcpy(tmp, p + i, k);
      tl = k;
    }
    if (o + tl > limit) {
      memcpy(out + o, "...", 3);
      o += 3;
      break;
    }
    memcpy(out + o, tmp, tl);
    o += tl;
    i += k;
  }
  out[o++] = '"';
  out[o] = '\0';
}

static void quote_str(char *out, size_t size, const char *s) {
  quote(out, size, (const unsigned char *)s, strlen(s));
}

/* ------------------------------------------------------------------ */
/* A table of names: arena of bytes, open-addressing hash              */
/* ------------------------------------------------------------------ */

typedef struct ntab {
  char *arena; /* names, each followed by a NUL */
  size_t alen, acap;
  size_t *off;
  size_t *len;
  size_t n, cap;
  size_t *slots; /* index + 1, 0 = empty */
  size_t nslots;
} ntab;

static void ntab_free(ntab *t) {
  free(t->arena);
  free(t->off);
  free(t->len);
  free(t->slots);
  memset(t, 0, sizeof *t);
}

static size_t hash_bytes(const unsigned char *p, size_t n) {
  uint64_t h = 1469598103934665603ULL; /* FNV-1a, as tf_hash_str */
  for (size_t i = 0; i < n; i++) {
    h ^= p[i];
    h *= 1099511628211ULL;
  }
  return (size_t)h;
}

static const char *ntab_name(const ntab *t, size_t i) {
  return t->arena + t->off[i];
}

/* Index of the name, or (size_t)-1. */
static size_t ntab_find(const ntab *t, const unsigned char *p, size_t n) {
  if (t->nslots == 0)
    return (size_t)-1;
  size_t mask = t->nslots - 1;
  for (size_t i = hash_bytes(p, n) & mask;; i = (i + 1) & mask) {
    size_t k = t->slots[i];
    if (k == 0)
      return (size_t)-1;
    k--;
    if (t->len[k] == n && memcmp(t->arena + t->off[k], p, n) == 0)
      return k;
  }
}

static void ntab_place(ntab *t, size_t k) {
  size_t mask = t->nslots - 1;
  size_t i = hash_bytes((const unsigned char *)t->arena + t->off[k],
                        t->len[k]) &
             mask;
  while (t->slots[i] != 0)
    i = (i + 1) & mask;
  t->slots[i] = k + 1;
}

/* Add a name known to be absent; its index is t->n - 1 afterwards. */
static int ntab_add(ntab *t, const unsigned char *p, size_t n) {
  if (t->n == t->cap) {
    size_t cap = t->cap ? 2 * t->cap : 16;
    size_t *off = realloc(t->off, cap * sizeof *off);
    if (off == NULL)
      return TWOFOLD_ENOMEM;
    t->off = off;
    size_t *len = realloc(t->len, cap * sizeof *len);
    if (len == NULL)
      return TWOFOLD_ENOMEM;
    t->len = len;
    t->cap = cap;
  }
  if (t->alen + n + 1 > t->acap) {
    size_t cap = t->acap ? 2 * t->acap : 1024;
    while (cap < t->alen + n + 1)
      cap *= 2;
    char *a = realloc(t->arena, cap);
    if (a == NULL)
      return TWOFOLD_ENOMEM;
    t->arena = a;
    t->acap = cap;
  }
  if (2 * (t->n + 1) > t->nslots) {
    size_t ns = t->nslots ? 2 * t->nslots : 64;
    size_t *slots = calloc(ns, sizeof *slots);
    if (slots == NULL)
      return TWOFOLD_ENOMEM;
    free(t->slots);
    t->slots = slots;
    t->nslots = ns;
    for (size_t k = 0; k < t->n; k++)
      ntab_place(t, k);
  }
  memcpy(t->arena + t->alen, p, n);
  t->arena[t->alen + n] = '\0';
  t->off[t->n] = t->alen;
  t->len[t->n] = n;
  t->alen += n + 1;
  ntab_place(t, t->n);
  t->n++;
  return TWOFOLD_OK;
}

/* ------------------------------------------------------------------ */
/* The byte source: memory or fd, plain or gzip                        */
/* ------------------------------------------------------------------ */

/* Decompression ahead of the parser, in a thread of its own (memory and
 * regular files only, whose reads cannot block for ever): a ring of
 * chunks filled by the thread and emptied by source_read(). */
#define PIPE_CHUNKS 4
#define PIPE_CHUNK (1u << 20)
typedef struct gzpipe {
  pthread_t thread;
  pthread_mutex_t mu;
  pthread_cond_t cv;
  unsigned char *chunk[PIPE_CHUNKS];
  size_t clen[PIPE_CHUNKS];
  size_t head, tail; /* chunks consumed, chunks produced */
  size_t off;        /* bytes consumed of chunk head */
  int done;          /* the thread has finished, with status rc */
  int rc;
  int stop;          /* the reader asks the thread to finish */
} gzpipe;

typedef struct source {
  gzpipe *pipe;
  const unsigned char *mem; /* memory input, or NULL */
  size_t memlen, mempos;
  int fd;                   /* fd input, or -1 */
  unsigned char *raw;       /* fd: bytes read ahead / gzip input */
  size_t rawlen, rawpos;
  int raw_eof;
  int ended;     /* no more data */
  int pend;      /* error to report once the data before it is used */
  char msg[200]; /* its message */
  int gz;        /* gzip stream */
  int zinit;     /* inflateInit2 done */
  int in_member; /* inside a gzip member */
  z_stream zs;
} source;

typedef struct field {
  unsigned char *p;
  size_t len;
  int esc; /* quoted with doubled quotes inside: unescape before use */
} field;

typedef struct region {
  int32_t base;   /* day of array index 0 */
  int32_t lo, hi; /* days seen span lo..hi (initialised part) */
  size_t cap;     /* allocated days */
  double **vals;  /* ncol arrays of cap */
  uint32_t *lines; /* line of each day's row, 0 = not seen */
  int left;        /* opts->fn was called for it */
} region;

typedef struct reader {
  const char *name;
  twofold_error *err;
  const twofold_read_options *opts;
  source src;

  unsigned char *buf; /* buf[len] is always a NUL sentinel */
  size_t cap, len, pos;
  int eof;
  long line; /* physical line where the current record starts */
  long rec_lines; /* newlines inside the record just parsed */
  long err_line;  /* line of the error reported */

  field *f;
  size_t nf, fcap;

  /* header */
  ntab cols;
  int wide;
  size_t nhead;
  size_t ri, di;       /* region and date field indices (long) */
  size_t nval;         /* value columns per series */
  size_t *vfield;      /* long: field index of series column k */
  size_t *reg_of;      /* wide: region of field j (or (size_t)-1) */
  double *vtmp;

  /* regions */
  ntab regs;
  region *rg;
  size_t nrg, rgcap;
  size_t last_r;
  int have_last;
  int fn_off;      /* a region got rows after its opts->fn call */
  char **fn_names; /* the value column names, for the series views */
  double **fn_vals;

  uint64_t entries; /* region-day entries read */
  uint64_t span;    /* days spanned by all regions together */
  uint64_t rows;    /* data records */

  /* date cache: the last year and month seen */
  unsigned char ym[7];
  int32_t ym_start;
  int ym_dim;
  int have_ym;
} reader;

/* Fill err through tf_error_set with a pre-formatted message. */
static int fail(reader *rd, int code, long line, long column,
                const char *fmt, ...)
#if defined(__GNUC__)
    __attribute__((format(printf, 5, 6)))
#endif
    ;
static int fail(reader *rd, int code, long line, long column,
                const char *fmt, ...) {
  char msg[TWOFOLD_ERROR_TEXT_SIZE];
  va_list ap;
  va_start(ap, fmt);
  vsnprintf(msg, sizeof msg, fmt, ap);
  va_end(ap);
  rd->err_line = line;
  return tf_error_set(rd->err, code, rd->name, line, column, "%s", msg);
}


/* The source functions below do not touch the reader's error report: they
 * return a status and leave a message in s->msg, so that they could run
 * apart from the parser.  source_read() turns them into reports. */
static int src_errno(source *s, int e, const char *what) {
  char buf[128];
  if (strerror_r(e, buf, sizeof buf) != 0)
    snprintf(buf, sizeof buf, "error %d", e);
  snprintf(s->msg, sizeof s->msg, "%s: %s", what, buf);
  return TWOFOLD_EIO;
}

static int src_msg(source *s, int code, const char *what, const char *more) {
  snprintf(s->msg, sizeof s->msg, "%s%s%s%s", what, more ? " (" : "",
           more ? more : "", more ? ")" : "");
  return code;
}

/* Read up to n raw bytes (fewer only at end of input). */
static int raw_read(source *s, unsigned char *dst, size_t n, size_t *got) {
  *got = 0;
  if (s->fd < 0) {
    size_t left = s->memlen - s->mempos;
    size_t k = left < n ? left : n;
    if (k)
      memcpy(dst, s->mem + s->mempos, k);
    s->mempos += k;
    *got = k;
    return TWOFOLD_OK;
  }
  while (*got < n) {
    size_t want = n - *got;
    if (want > (size_t)SSIZE_MAX)
      want = (size_t)SSIZE_MAX;
    ssize_t r = read(s->fd, dst + *got, want);
    if (r < 0) {
      if (errno == EINTR)
        continue;
      return src_errno(s, errno, "read failed");
    }
    if (r == 0)
      break;
    *got += (size_t)r;
  }
  return TWOFOLD_OK;
}

static void pipe_start(source *s);

static int source_open(reader *rd) {
  source *s = &rd->src;
  unsigned char magic[2];
  size_t have;
  if (s->fd >= 0) {
    s->raw = malloc(RAW_CHUNK);
    if (s->raw == NULL)
      return fail(rd, TWOFOLD_ENOMEM, 0, 0, "out of memory");
    int rc = raw_read(s, s->raw, 2, &s->rawlen);
    if (rc)
      return fail(rd, rc, 0, 0, "%s", s->msg);
    have = s->rawlen;
    memcpy(magic, s->raw, have);
    if (have < 2)
      s->raw_eof = 1;
  } else {
    have = s->memlen < 2 ? s->memlen : 2;
    if (have)
      memcpy(magic, s->mem, have);
  }
  if (have == 2 && magic[0] == 0x1f && magic[1] == 0x8b) {
    s->gz = 1;
    memset(&s->zs, 0, sizeof s->zs);
    int zr = inflateInit2(&s->zs, 15 + 32);
    if (zr != Z_OK)
      return fail(rd, zr == Z_MEM_ERROR ? TWOFOLD_ENOMEM : TWOFOLD_EGZIP, 0,
                  0, "cannot start gzip decompression");
    s->zinit = 1;
    s->in_member = 1;
    if (s->fd >= 0) {
      s->zs.next_in = s->raw;
      s->zs.avail_in = (uInt)s->rawlen;
      s->rawlen = s->rawpos = 0;
    }
    pipe_start(s);
  }
  return TWOFOLD_OK;
}

static void pipe_end(source *s);

static void source_close(source *s) {
  pipe_end(s);
  if (s->zinit)
    inflateEnd(&s->zs);
  s->zinit = 0;
  free(s->raw);
  s->raw = NULL;
}

/* Decompress up to n bytes (fewer at the end of the stream or before an
 * error; *got holds what was produced even when an error is returned). */
static int gz_read(source *s, unsigned char *dst, size_t n, size_t *got) {
  z_stream *z = &s->zs;
  *got = 0;
  while (*got < n) {
    size_t want = n - *got;
    if (want > UINT_MAX)
      want = UINT_MAX;
    if (z->avail_in == 0) {
      if (s->fd < 0) {
        size_t left = s->memlen - s->mempos;
        if (left > UINT_MAX)
          left = UINT_MAX;
        z->next_in = (unsigned char *)(uintptr_t)(s->mem + s->mempos);
        z->avail_in = (uInt)left;
        s->mempos += left;
      } else if (!s->raw_eof) {
        size_t k;
        int rc = raw_read(s, s->raw, RAW_CHUNK, &k);
        if (rc)
          return rc;
        if (k < RAW_CHUNK)
          s->raw_eof = 1;
        z->next_in = s->raw;
        z->avail_in = (uInt)k;
      }
    }
    if (z->avail_in == 0) { /* end of the compressed input */
      if (s->in_member)
        return src_msg(s, TWOFOLD_EGZIP,
                       "truncated gzip stream: the input ends inside a "
                       "member",
                       NULL);
      break;
    }
    if (!s->in_member) { /* another member follows */
      if (inflateReset(z) != Z_OK)
        return src_msg(s, TWOFOLD_EGZIP, "corrupt gzip stream", NULL);
      s->in_member = 1;
    }
    z->next_out = dst + *got;
    z->avail_out = (uInt)want;
    int zr = inflate(z, Z_NO_FLUSH);
    *got += want - z->avail_out;
    if (zr == Z_STREAM_END)
      s->in_member = 0;
    else if (zr == Z_MEM_ERROR)
      return src_msg(s, TWOFOLD_ENOMEM, "out of memory", NULL);
    else if (zr != Z_OK && zr != Z_BUF_ERROR)
      return src_msg(s, TWOFOLD_EGZIP, "corrupt gzip stream",
                     z->msg ? z->msg : "invalid data");
  }
  return TWOFOLD_OK;
}

static void *pipe_main(void *arg) {
  source *s = arg;
  gzpipe *p = s->pipe;
  for (;;) {
    pthread_mutex_lock(&p->mu);
    while (p->tail - p->head == PIPE_CHUNKS && !p->stop)
      pthread_cond_wait(&p->cv, &p->mu);
    int stop = p->stop;
    size_t i = p->tail % PIPE_CHUNKS;
    pthread_mutex_unlock(&p->mu);
    if (stop)
      break;
    size_t got = 0;
    int rc = TWOFOLD_OK;
    if (p->chunk[i] == NULL && (p->chunk[i] = malloc(PIPE_CHUNK)) == NULL)
      rc = src_msg(s, TWOFOLD_ENOMEM, "out of memory", NULL);
    else
      rc = gz_read(s, p->chunk[i], PIPE_CHUNK, &got);
    pthread_mutex_lock(&p->mu);
    p->clen[i] = got;
    if (got)
      p->tail++;
    if (rc || got < PIPE_CHUNK) {
      p->rc = rc;
      p->done = 1;
    }
    int fin = p->done;
    pthread_cond_broadcast(&p->cv);
    pthread_mutex_unlock(&p->mu);
    if (fin)
      break;
  }
  return NULL;
}

/* As gz_read, from the ring. */
static int pipe_read(source *s, unsigned char *dst, size_t n, size_t *got) {
  gzpipe *p = s->pipe;
  *got = 0;
  while (*got < n) {
    pthread_mutex_lock(&p->mu);
    while (p->head == p->tail && !p->done)
      pthread_cond_wait(&p->cv, &p->mu);
    if (p->head == p->tail) {
      int rc = p->rc;
      pthread_mutex_unlock(&p->mu);
      return rc;
    }
    size_t i = p->head % PIPE_CHUNKS, len = p->clen[i];
    pthread_mutex_unlock(&p->mu);
    size_t k = len - p->off;
    if (k > n - *got)
      k = n - *got;
    memcpy(dst + *got, p->chunk[i] + p->off, k);
    *got += k;
    p->off += k;
    if (p->off == len) {
      pthread_mutex_lock(&p->mu);
      p->head++;
      p->off = 0;
      pthread_cond_broadcast(&p->cv);
      pthread_mutex_unlock(&p->mu);
    }
  }
  return TWOFOLD_OK;
}

static void pipe_start(source *s) {
  if (s->fd >= 0) {
    struct stat st;
    if (fstat(s->fd, &st) != 0 || !S_ISREG(st.st_mode))
      return;
  }
  gzpipe *p = calloc(1, sizeof *p);
  if (p == NULL)
    return;
  if (pthread_mutex_init(&p->mu, NULL) != 0) {
    free(p);
    return;
  }
  if (pthread_cond_init(&p->cv, NULL) != 0) {
    pthread_mutex_destroy(&p->mu);
    free(p);
    return;
  }
  s->pipe = p;
  if (pthread_create(&p->thread, NULL, pipe_main, s) != 0) {
    s->pipe = NULL; /* decompress in the reader's thread instead */
    pthread_cond_destroy(&p->cv);
    pthread_mutex_destroy(&p->mu);
    free(p);
  }
}

static void pipe_end(source *s) {
  gzpipe *p = s->pipe;
  if (p == NULL)
    return;
  pthread_mutex_lock(&p->mu);
  p->stop = 1;
  pthread_cond_broadcast(&p->cv);
  pthread_mutex_unlock(&p->mu);
  pthread_join(p->thread, NULL);
  for (size_t i = 0; i < PIPE_CHUNKS; i++)
    free(p->chunk[i]);
  pthread_cond_destroy(&p->cv);
  pthread_mutex_destroy(&p->mu);
  free(p);
  s->pipe = NULL;
}

static int gz_any_read(source *s, unsigned char *dst, size_t n,
                       size_t *got) {
  return s->pipe ? pipe_read(s, dst, n, got) : gz_read(s, dst, n, got);
}

static int plain_read(source *s, unsigned char *dst, size_t n, size_t *got) {
  size_t k = 0;
  if (s->rawpos < s->rawlen) { /* bytes read while looking for gzip */
    k = s->rawlen - s->rawpos;
    if (k > n)
      k = n;
    memcpy(dst, s->raw + s->rawpos, k);
    s->rawpos += k;
  }
  size_t more = 0;
  int rc = k < n ? raw_read(s, dst + k, n - k, &more) : TWOFOLD_OK;
  *got = k + more;
  return rc;
}

/* Read up to n decoded bytes into dst.  Fewer only at the end of input
 * (then s->ended is set) or just before an error, which is reported by
 * the next call: errors come at their place in the stream. */
static int source_read(reader *rd, unsigned char *dst, size_t n,
                       size_t *got) {
  source *s = &rd->src;
  *got = 0;
  if (s->pend == 0) {
    s->pend =
        s->gz ? gz_any_read(s, dst, n, got) : plain_read(s, dst, n, got);
    if (s->pend == 0 && *got < n)
      s->ended = 1;
  }
  if (s->pend != 0 && *got == 0)
    return fail(rd, s->pend, rd->line, 0, "%s", s->msg);
  return TWOFOLD_OK;
}

/* ------------------------------------------------------------------ */
/* The buffer and the tokenizer                                        */
/* ------------------------------------------------------------------ */

/* Fill the buffer's free space.  Returns 0 or a status. */
static int refill(reader *rd) {
  if (rd->pos > 0) {
    memmove(rd->buf, rd->buf + rd->pos, rd->len - rd->pos);
    rd->len -= rd->pos;
    rd->pos = 0;
  }
  if (rd->len == rd->cap) {
    if (rd->cap >= TWOFOLD_READ_RECORD_MAX)
      return fail(rd, TWOFOLD_ETOOLARGE, rd->line, 0,
                  "record longer than %lu bytes",
                  (unsigned long)TWOFOLD_READ_RECORD_MAX);
    size_t cap = 2 * rd->cap;
    if (cap > TWOFOLD_READ_RECORD_MAX)
      cap = TWOFOLD_READ_RECORD_MAX;
    unsigned char *b = realloc(rd->buf, cap + 1);
    if (b == NULL)
      return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
    rd->buf = b;
    rd->cap = cap;
  }
  size_t got;
  int rc = source_read(rd, rd->buf + rd->len, rd->cap - rd->len, &got);
  if (rc)
    return rc;
  rd->eof = rd->src.ended;
  rd->len += got;
  rd->buf[rd->len] = '\0';
  return TWOFOLD_OK;
}

enum { C_DATA = 0, C_COMMA, C_LF, C_CR, C_QUOTE, C_NUL };
/* Byte classes outside quotes (NUL is also the buffer's sentinel). */
static const unsigned char cls_plain[256] = {
    [0] = C_NUL, [','] = C_COMMA, ['\n'] = C_LF, ['\r'] = C_CR,
    ['"'] = C_QUOTE};
/* Byte classes inside quotes. */
static const unsigned char cls_quoted[256] = {
    [0] = C_NUL, ['\n'] = C_LF, ['"'] = C_QUOTE};

#define NEED_MORE 1

#if defined(__GNUC__)
#define TF_NOINLINE __attribute__((noinline))
#else
#define TF_NOINLINE
#endif

TF_NOINLINE static int grow_fields(reader *rd) {
  if (rd->fcap >= TWOFOLD_READ_FIELDS_MAX)
    return fail(rd, TWOFOLD_ETOOLARGE, rd->line, (long)rd->nf + 1,
                "more than %lu fields in a record",
                (unsigned long)TWOFOLD_READ_FIELDS_MAX);
  size_t cap = rd->fcap ? 2 * rd->fcap : 64;
  field *f = realloc(rd->f, cap * sizeof *f);
  if (f == NULL)
    return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
  rd->f = f;
  rd->fcap = cap;
  return TWOFOLD_OK;
}

static inline int add_field(reader *rd, unsigned char *p, size_t len,
                            int esc) {
  if (rd->nf == rd->fcap) {
    int rc = grow_fields(rd);
    if (rc)
      return rc;
  }
  field *f = &rd->f[rd->nf++];
  f->p = p;
  f->len = len;
  f->esc = esc;
  return TWOFOLD_OK;
}

static int stray(reader *rd, long column, const unsigned char *start,
                 const unsigned char *q, const unsigned char *end,
                 const char *what) {
  char v[QUOTE_SIZE];
  const unsigned char *e = q + 1;
  while (e < end && *e != '\n' && *e != ',' && e - start < 80)
    e++;
  quote(v, sizeof v, start, (size_t)(e - start));
  return fail(rd, TWOFOLD_EPARSE, rd->line, column, "%s in %s", what, v);
}

/* Tokenize one record starting at rd->buf + rd->pos.  Returns 0 with
 * rd->f[0..nf-1] and *next set, NEED_MORE if the record may continue past
 * the buffer's end, or an error status. */
static int parse_record(reader *rd, size_t *next) {
  unsigned char *q = rd->buf + rd->pos;
  unsigned char *end = rd->buf + rd->len;
  int eof = rd->eof;
  long nl = 0;
  int rc;
  rd->nf = 0;
  for (;;) {
    if (*q == '"' && q < end) {
      unsigned char *start = ++q;
      int esc = 0;
      for (;;) {
        while (cls_quoted[*q] == C_DATA)
          q++;
        if (q >= end) {
          if (!eof)
            return NEED_MORE;
        {
          char v[QUOTE_SIZE];
          size_t n = (size_t)(end - start) + 1;
          quote(v, 40, start - 1, n);
          return fail(rd, TWOFOLD_EPARSE, rd->line, (long)rd->nf + 1,
                      "quoted field still open at the end of input: %s", v);
        }
        }
        if (*q == '\n') {
          nl++;
          q++;
          continue;
        }
        if (*q == '\0') {
          rc = fail(rd, TWOFOLD_EENCODING, rd->line, (long)rd->nf + 1,
                    "NUL byte inside a field");
          return rc;
        }
        /* a quote: doubled, or the closing one */
        if (q + 1 >= end && !eof)
          return NEED_MORE;
        if (q + 1 < end && q[1] == '"') {
          esc = 1;
          q += 2;
          continue;
        }
        break;
      }
      if ((rc = add_field(rd, start, (size_t)(q - start), esc)))
        return rc;
      q++;
      if (q >= end) {
        if (!eof)
          return NEED_MORE;
        break;
      }
      if (*q == ',') {
        q++;
        continue;
      }
      if (*q == '\n') {
        q++;
        break;
      }
      if (*q == '\r') {
        if (q + 1 >= end && !eof)
          return NEED_MORE;
        if (q + 1 >= end) {
          q++;
          break;
        }
        if (q[1] == '\n') {
          q += 2;
          break;
        }
        return stray(rd, (long)rd->nf, start - 1, q, end,
                     "carriage return not before a line feed");
      }
      return stray(rd, (long)rd->nf, start - 1, q, end,
                   "text after the closing quote of a field");
    }
    unsigned char *start = q;
    while (cls_plain[*q] == C_DATA)
      q++;
    if (q >= end) {
      if (!eof)
        return NEED_MORE;
      if ((rc = add_field(rd, start, (size_t)(q - start), 0)))
        return rc;
      break;
    }
    switch (cls_plain[*q]) {
    case C_COMMA:
      if ((rc = add_field(rd, start, (size_t)(q - start), 0)))
        return rc;
      q++;
      continue;
    case C_LF:
      if ((rc = add_field(rd, start, (size_t)(q - start), 0)))
        return rc;
      q++;
      break;
    case C_CR:
      if (q + 1 >= end && !eof)
        return NEED_MORE;
      if (q + 1 >= end || q[1] == '\n') {
        if ((rc = add_field(rd, start, (size_t)(q - start), 0)))
          return rc;
        q += q + 1 >= end ? 1 : 2;
        break;
      }
      return stray(rd, (long)rd->nf + 1, start, q, end,
                   "carriage return not before a line feed");
    case C_QUOTE:
      return stray(rd, (long)rd->nf + 1, start, q, end,
                   "quote inside an unquoted field");
    default:
      return fail(rd, TWOFOLD_EENCODING, rd->line, (long)rd->nf + 1,
                  "NUL byte inside a field");
    }
    break;
  }
  rd->rec_lines = nl + 1;
  *next = (size_t)(q - rd->buf);
  return TWOFOLD_OK;
}

/* Next record into rd->f, skipping empty lines.  Returns 0, 1 at end of
 * input, or an error status.  rd->line is the record's first line. */
static int next_record(reader *rd) {
  for (;;) {
    if (rd->pos >= rd->len) {
      if (rd->eof)
        return 1;
      int rc = refill(rd);
      if (rc)
        return rc;
      continue;
    }
    size_t next = 0;
    int rc = parse_record(rd, &next);
    if (rc == NEED_MORE) {
      rc = refill(rd);
      if (rc)
        return rc;
      continue;
    }
    if (rc)
      return rc;
    int blank = rd->nf == 1 && rd->f[0].len == 0 &&
                rd->buf[rd->pos] != '"';
    rd->pos = next;
    if (blank) {
      rd->line += rd->rec_lines;
      continue;
    }
    return 0;
  }
}

/* Turn doubled quotes into single ones, in place (the record is complete
 * and will not be parsed again). */
static void unescape(field *f) {
  if (!f->esc)
    return;
  unsigned char *r = f->p, *w = f->p, *e = f->p + f->len;
  while (r < e) {
    if (*r == '"')
      r++; /* the first of a pair */
    *w++ = *r++;
  }
  f->len = (size_t)(w - f->p);
  f->esc = 0;
}

/* ------------------------------------------------------------------ */
/* Values                                                              */
/* ------------------------------------------------------------------ */

static int days_in_month(int y, int m) {
  static const unsigned char dm[12] = {31, 28, 31, 30, 31, 30,
                                       31, 31, 30, 31, 30, 31};
  return m == 2 && twofold_date_is_leap(y) ? 29 : dm[m - 1];
}

static inline int d2(const unsigned char *p) {
  return (p[0] - '0') * 10 + (p[1] - '0');
}

static inline int isdig(unsigned char c) { return (unsigned)(c - '0') < 10; }

/* Equality of two short byte strings of length n, without a call. */
static inline int same_bytes(const void *a, const void *b, size_t n) {
  const unsigned char *x = a, *y = b;
  while (n >= 8) {
    uint64_t u, v;
    memcpy(&u, x, 8);
    memcpy(&v, y, 8);
    if (u != v)
      return 0;
    x += 8;
    y += 8;
    n -= 8;
  }
  while (n--)
    if (*x++ != *y++)
      return 0;
  return 1;
}

static int field_date(reader *rd, field *f, size_t col, int32_t *day) {
  unescape(f);
  const unsigned char *p = f->p;
  if (f->len == 10 && p[4] == '-' && p[7] == '-' && isdig(p[0]) &&
      isdig(p[1]) && isdig(p[2]) && isdig(p[3]) && isdig(p[5]) &&
      isdig(p[6]) && isdig(p[8]) && isdig(p[9])) {
    int d = d2(p + 8);
    if (!(rd->have_ym && same_bytes(p, rd->ym, 7))) {
      int y = d2(p) * 100 + d2(p + 2), m = d2(p + 5);
      int32_t start;
      if (twofold_date_from_ymd(y, m, 1, &start) == TWOFOLD_OK) {
        memcpy(rd->ym, p, 7);
        rd->ym_start = start;
        rd->ym_dim = days_in_month(y, m);
        rd->have_ym = 1;
      } else
        goto bad;
    }
    if (d >= 1 && d <= rd->ym_dim) {
      *day = rd->ym_start + d - 1;
      return TWOFOLD_OK;
    }
  }
bad:;
  char v[QUOTE_SIZE], c[QUOTE_SIZE];
  quote(v, sizeof v, f->p, f->len);
  quote_str(c, sizeof c, ntab_name(&rd->cols, col));
  return fail(rd, TWOFOLD_EDATE, rd->line, (long)col + 1,
              "invalid date %s in column %s (expected an existing "
              "calendar date written YYYY-MM-DD)",
              v, c);
}

/* A count: empty = missing (NaN); otherwise digits only, at most 2^53. */
static int field_count(reader *rd, field *f, size_t col, double *out) {
  unescape(f);
  const unsigned char *p = f->p;
  size_t n = f->len;
  if (n == 0) {
    *out = NAN;
    return TWOFOLD_OK;
  }
  uint64_t v = 0;
  size_t i = 0;
  int big = 0;
  for (; i < n && isdig(p[i]); i++) {
    v = v * 10 + (uint64_t)(p[i] - '0');
    if (v > ((uint64_t)1 << 53)) {
      big = 1;
      v = (uint64_t)1 << 53; /* saturate: keep scanning */
    }
  }
  if (i == n && !big) {
    *out = (double)v;
    return TWOFOLD_OK;
  }
  const char *why;
  if (i == n)
    why = "count above 2^53 (9007199254740992)";
  else if (p[0] == '-' && n > 1)
    why = "negative count";
  else if (i > 0 && p[i] == '.')
    why = "count with a decimal point (counts are whole numbers written "
          "in digits only)";
  else
    why = "non-numeric count (counts are whole numbers written in digits "
          "only)";
  char vq[QUOTE_SIZE], c[QUOTE_SIZE];
  quote(vq, sizeof vq, p, n);
  quote_str(c, sizeof c, ntab_name(&rd->cols, col));
  return fail(rd, TWOFOLD_ECOUNT, rd->line, (long)col + 1,
              "%s %s in column %s", why, vq, c);
}

/* ------------------------------------------------------------------ */
/* Regions: dense windows of days                                      */
/* ------------------------------------------------------------------ */

static void region_free(region *g, size_t ncol) {
  if (g->vals)
    for (size_t c = 0; c < ncol; c++)
      free(g->vals[c]);
  free(g->vals);
  free(g->lines);
}

/* Check a new region name and add it; its index goes to *r. */
static int region_new(reader *rd, field *f, size_t col, size_t *r) {
  char v[QUOTE_SIZE];
  if (f->len == 0)
    return fail(rd, TWOFOLD_EPARSE, rd->line, (long)col + 1,
                "empty region name \"\"");
  if (!utf8_ok(f->p, f->len)) {
    quote(v, sizeof v, f->p, f->len);
    return fail(rd, TWOFOLD_EENCODING, rd->line, (long)col + 1,
                "invalid UTF-8 in region name %s", v);
  }
  if (rd->nrg == rd->rgcap) {
    size_t cap = rd->rgcap ? 2 * rd->rgcap : 64;
    region *g = realloc(rd->rg, cap * sizeof *g);
    if (g == NULL)
      return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
    rd->rg = g;
    rd->rgcap = cap;
  }
  region *g = &rd->rg[rd->nrg];
  memset(g, 0, sizeof *g);
  g->vals = calloc(rd->nval, sizeof *g->vals);
  if (g->vals == NULL || ntab_add(&rd->regs, f->p, f->len)) {
    free(g->vals);
    return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
  }
  *r = rd->nrg++;
  return TWOFOLD_OK;
}

/* Reallocate g's arrays to cap days with day newbase at index 0. */
static int region_resize(reader *rd, region *g, size_t cap, int32_t newbase) {
  size_t used = g->cap ? (size_t)(g->hi - g->lo + 1) : 0;
  size_t from = g->cap ? (size_t)(g->lo - g->base) : 0;
  size_t to = g->cap ? (size_t)(g->lo - newbase) : 0;
  if (newbase == g->base || g->cap == 0) {
    for (size_t c = 0; c < rd->nval; c++) {
      double *v = realloc(g->vals[c], cap * sizeof *v);
      if (v == NULL)
        return TWOFOLD_ENOMEM;
      g->vals[c] = v;
    }
    uint32_t *l = realloc(g->lines, cap * sizeof *l);
    if (l == NULL)
      return TWOFOLD_ENOMEM;
    g->lines = l;
  } else {
    for (size_t c = 0; c < rd->nval; c++) {
      double *v = malloc(cap * sizeof *v);
      if (v == NULL)
        return TWOFOLD_ENOMEM;
      memcpy(v + to, g->vals[c] + from, used * sizeof *v);
      free(g->vals[c]);
      g->vals[c] = v;
    }
    uint32_t *l = malloc(cap * sizeof *l);
    if (l == NULL)
      return TWOFOLD_ENOMEM;
    memcpy(l + to, g->lines + from, used * sizeof *l);
    free(g->lines);
    g->lines = l;
  }
  g->cap = cap;
  g->base = newbase;
  return TWOFOLD_OK;
}

static void region_init(reader *rd, region *g, size_t i, size_t n) {
  for (size_t c = 0; c < rd->nval; c++) {
    double *v = g->vals[c] + i;
    for (size_t k = 0; k < n; k++)
      v[k] = NAN;
  }
  memset(g->lines + i, 0, n * sizeof *g->lines);
}

static size_t grow_cap(size_t cap, size_t need) {
  size_t c = cap ? cap + cap / 2 : 32;
  if (c > DAY_RANGE)
    c = DAY_RANGE;
  return c < need ? need : c;
}

/* Store the values rd->vtmp of day for region r, read on rd->line.
 * Returns 0, TWOFOLD_EDUPLICATE (*earlier = the first line),
 * TWOFOLD_ETOOLARGE or TWOFOLD_ENOMEM (err not yet filled). */
static int region_put(reader *rd, size_t r, int32_t day, const double *v,
                      uint32_t line, uint32_t *earlier) {
  region *g = &rd->rg[r];
  rd->entries++;
  if (day == g->hi + 1 && g->cap != 0 &&
      (size_t)(day - g->base) < g->cap) { /* the next day: no gap */
    size_t i = (size_t)(day - g->base);
    g->hi = day;
    rd->span++;
    g->lines[i] = line;
    for (size_t c = 0; c < rd->nval; c++)
      g->vals[c][i] = v[c];
    return rd->span > (uint64_t)TWOFOLD_READ_SPAN_BASE +
                          (uint64_t)TWOFOLD_READ_SPAN_PER_ENTRY * rd->entries
               ? TWOFOLD_ETOOLARGE
               : TWOFOLD_OK;
  }
  if (g->cap == 0) {
    /* Room for as many days as the region before spans: in a file sorted
     * by region that region is complete, and this one is likely as long,
     * so its arrays need not grow day by day (build() trims them). */
    size_t cap = 32;
    if (r > 0) {
      const region *p = &rd->rg[r - 1];
      size_t prev = p->cap ? (size_t)((int64_t)p->hi - p->lo + 1) : 0;
      if (prev > cap)
        cap = prev;
    }
    int rc = region_resize(rd, g, cap, day);
    if (rc)
      return rc;
    g->lo = g->hi = day;
    region_init(rd, g, 0, 1);
    rd->span++;
  } else if (day > g->hi) {
    size_t need = (size_t)((int64_t)day - g->base + 1);
    if (need > g->cap) {
      int rc = region_resize(rd, g, grow_cap(g->cap, need), g->base);
      if (rc)
        return rc;
    }
    region_init(rd, g, (size_t)(g->hi - g->base + 1),
                (size_t)(day - g->hi));
    rd->span += (uint64_t)(day - g->hi);
    g->hi = day;
  } else if (day < g->lo) {
    if (day < g->base) {
      size_t need = (size_t)((int64_t)g->hi - day + 1);
      size_t cap = grow_cap(g->cap, need);
      int rc = region_resize(rd, g, cap,
                             (int32_t)((int64_t)g->hi - (int64_t)cap + 1));
      if (rc)
        return rc;
    }
    region_init(rd, g, (size_t)(day - g->base), (size_t)(g->lo - day));
    rd->span += (uint64_t)(g->lo - day);
    g->lo = day;
  }
  size_t i = (size_t)(day - g->base);
  if (g->lines[i] != 0) {
    *earlier = g->lines[i];
    return TWOFOLD_EDUPLICATE;
  }
  if (rd->span > (uint64_t)TWOFOLD_READ_SPAN_BASE +
                     (uint64_t)TWOFOLD_READ_SPAN_PER_ENTRY * rd->entries)
    return TWOFOLD_ETOOLARGE;
  g->lines[i] = line;
  for (size_t c = 0; c < rd->nval; c++)
    g->vals[c][i] = v[c];
  return TWOFOLD_OK;
}

static int put_failed(reader *rd, int rc, size_t r, field *df,
                      uint32_t earlier) {
  char reg[QUOTE_SIZE], d[QUOTE_SIZE];
  const ntab *t = &rd->regs;
  quote(reg, sizeof reg, (const unsigned char *)ntab_name(t, r), t->len[r]);
  quote(d, sizeof d, df->p, df->len);
  long col = (long)rd->di + 1;
  if (rc == TWOFOLD_EDUPLICATE) {
    char first[48];
    if (earlier == UINT32_MAX)
      snprintf(first, sizeof first, "an earlier line");
    else
      snprintf(first, sizeof first, "line %lu", (unsigned long)earlier);
    if (rd->wide)
      return fail(rd, rc, rd->line, col,
                  "duplicate date %s (first on %s)", d, first);
    return fail(rd, rc, rd->line, col,
                "duplicate date %s for region %s (first on %s)", d, reg,
                first);
  }
  if (rc == TWOFOLD_ETOOLARGE)
    return fail(rd, rc, rd->line, col,
                "date %s for region %s makes the regions span %llu days "
                "together, more than %llu for %llu entries",
                d, reg, (unsigned long long)rd->span,
                (unsigned long long)((uint64_t)TWOFOLD_READ_SPAN_BASE +
                                     (uint64_t)TWOFOLD_READ_SPAN_PER_ENTRY *
                                         rd->entries),
                (unsigned long long)rd->entries);
  return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
}

/* ------------------------------------------------------------------ */
/* Header and records                                                  */
/* ------------------------------------------------------------------ */

static void list_columns(const reader *rd, char *out, size_t size) {
  size_t o = 0;
  out[0] = '\0';
  for (size_t j = 0; j < rd->cols.n && o + 8 < size; j++) {
    char q[QUOTE_SIZE];
    quote_str(q, sizeof q, ntab_name(&rd->cols, j));
    int k = snprintf(out + o, size - o, "%s%s", j ? ", " : "", q);
    if (k < 0 || (size_t)k >= size - o) {
      out[o] = '\0';
      break;
    }
    o += (size_t)k;
  }
}

static int no_column(reader *rd, const char *what, const char *name) {
  char q[QUOTE_SIZE], list[200];
  quote_str(q, sizeof q, name);
  list_columns(rd, list, sizeof list);
  return fail(rd, TWOFOLD_ECOLUMN, rd->line, 0,
              "no %s column %s in the header (columns: %s)", what, q, list);
}

static size_t col_find(const reader *rd, const char *name) {
  return ntab_find(&rd->cols, (const unsigned char *)name, strlen(name));
}

static int read_header(reader *rd) {
  int rc = next_record(rd);
  if (rc == 1)
    return fail(rd, TWOFOLD_EEMPTY, 1, 0, "empty input (no header)");
  if (rc)
    return rc;
  char v[QUOTE_SIZE];
  for (size_t j = 0; j < rd->nf; j++) {
    field *f = &rd->f[j];
    unescape(f);
    if (f->len == 0)
      return fail(rd, TWOFOLD_EPARSE, rd->line, (long)j + 1,
                  "empty column name \"\" in the header");
    if (!utf8_ok(f->p, f->len)) {
      quote(v, sizeof v, f->p, f->len);
      return fail(rd, TWOFOLD_EENCODING, rd->line, (long)j + 1,
                  "invalid UTF-8 in column name %s", v);
    }
    size_t k = ntab_find(&rd->cols, f->p, f->len);
    if (k != (size_t)-1) {
      quote(v, sizeof v, f->p, f->len);
      return fail(rd, TWOFOLD_EDUPLICATE, rd->line, (long)j + 1,
                  "duplicate column name %s (also column %lu)", v,
                  (unsigned long)k + 1);
    }
    if (ntab_add(&rd->cols, f->p, f->len))
      return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
  }
  rd->nhead = rd->nf;
  const twofold_read_options *o = rd->opts;
  size_t ri = col_find(rd, o->region), di = col_find(rd, o->date);
  int layout = o->layout;
  if (layout == TWOFOLD_LAYOUT_AUTO) {
    if (ri != (size_t)-1)
      layout = TWOFOLD_LAYOUT_LONG;
    else if (di != (size_t)-1)
      layout = TWOFOLD_LAYOUT_WIDE;
    else {
      char a[QUOTE_SIZE], b[QUOTE_SIZE], list[200];
      quote_str(a, sizeof a, o->region);
      quote_str(b, sizeof b, o->date);
      list_columns(rd, list, sizeof list);
      return fail(rd, TWOFOLD_ECOLUMN, rd->line, 0,
                  "neither a region column %s nor a date column %s in the "
                  "header (columns: %s)",
                  a, b, list);
    }
  }
  if (di == (size_t)-1)
    return no_column(rd, "date", o->date);
  rd->di = di;
  if (layout == TWOFOLD_LAYOUT_LONG) {
    if (ri == (size_t)-1)
      return no_column(rd, "region", o->region);
    if (ri == di)
      return fail(rd, TWOFOLD_EINVAL, rd->line, 0,
                  "the region and date columns are the same");
    rd->ri = ri;
    size_t first = (size_t)-1;
    if (o->count) {
      first = col_find(rd, o->count);
      if (first == (size_t)-1)
        return no_column(rd, "count", o->count);
      if (first == ri || first == di)
        return fail(rd, TWOFOLD_EINVAL, rd->line, (long)first + 1,
                    "the count column cannot be the region or date column");
    }
    rd->vfield = malloc(rd->nhead * sizeof *rd->vfield);
    if (rd->vfield == NULL)
      return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
    if (first != (size_t)-1)
      rd->vfield[rd->nval++] = first;
    for (size_t j = 0; j < rd->nhead; j++)
      if (j != ri && j != di && j != first)
        rd->vfield[rd->nval++] = j;
    if (rd->nval == 0) {
      char list[200];
      list_columns(rd, list, sizeof list);
      return fail(rd, TWOFOLD_ECOLUMN, rd->line, 0,
                  "no count column besides the region and date columns "
                  "(columns: %s)",
                  list);
    }
  } else {
    rd->wide = 1;
    rd->nval = 1;
    if (rd->nhead < 2) {
      char list[200];
      list_columns(rd, list, sizeof list);
      return fail(rd, TWOFOLD_ECOLUMN, rd->line, 0,
                  "wide layout needs region columns besides the date "
                  "column (columns: %s)",
                  list);
    }
    rd->reg_of = malloc(rd->nhead * sizeof *rd->reg_of);
    if (rd->reg_of == NULL)
      return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
    for (size_t j = 0; j < rd->nhead; j++) {
      rd->reg_of[j] = (size_t)-1;
      if (j == di)
        continue;
      field f = {(unsigned char *)(uintptr_t)ntab_name(&rd->cols, j),
                 rd->cols.len[j], 0};
      if ((rc = region_new(rd, &f, j, &rd->reg_of[j])))
        return rc;
    }
  }
  rd->vtmp = malloc(rd->nval * sizeof *rd->vtmp);
  if (rd->vtmp == NULL)
    return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
  return TWOFOLD_OK;
}

static int fields_mismatch(reader *rd) {
  size_t col = (rd->nf < rd->nhead ? rd->nf : rd->nhead) + 1;
  const unsigned char *s = rd->f[0].p;
  const field *last = &rd->f[rd->nf - 1];
  size_t n = (size_t)(last->p + last->len - s);
  char v[QUOTE_SIZE];
  quote(v, sizeof v, s, n);
  return fail(rd, TWOFOLD_EFIELDS, rd->line, (long)col,
              "record has %lu fields, the header %lu: %s",
              (unsigned long)rd->nf, (unsigned long)rd->nhead, v);
}

static inline uint32_t line32(long line) {
  return line >= (long)UINT32_MAX ? UINT32_MAX : (uint32_t)line;
}

/* Call opts->fn for region r, which the reader leaves for another, with
 * a series that borrows the region's arrays. */
static int region_left(reader *rd, size_t r) {
  region *g = &rd->rg[r];
  if (rd->opts->fn == NULL || rd->fn_off || g->left)
    return TWOFOLD_OK;
  if (rd->fn_names == NULL) {
    rd->fn_names = calloc(rd->nval, sizeof *rd->fn_names);
    rd->fn_vals = calloc(rd->nval, sizeof *rd->fn_vals);
    if (rd->fn_names == NULL || rd->fn_vals == NULL)
      return fail(rd, TWOFOLD_ENOMEM, rd->line, 0, "out of memory");
    for (size_t c = 0; c < rd->nval; c++)
      rd->fn_names[c] = (char *)ntab_name(&rd->cols, rd->vfield[c]);
  }
  g->left = 1;
  for (size_t c = 0; c < rd->nval; c++)
    rd->fn_vals[c] = g->vals[c] + (g->lo - g->base);
  twofold_series view;
  memset(&view, 0, sizeof view);
  view.region = (char *)ntab_name(&rd->regs, r);
  view.first_day = g->lo;
  view.length = (size_t)((int64_t)g->hi - g->lo + 1);
  view.ncol = view.cap = rd->nval;
  view.names = rd->fn_names;
  view.values = rd->fn_vals;
  rd->opts->fn(rd->opts->fn_arg, r, &view);
  return TWOFOLD_OK;
}

static int long_record(reader *rd) {
  field *rf = &rd->f[rd->ri];
  unescape(rf);
  size_t r;
  const ntab *t = &rd->regs;
  if (rd->have_last && t->len[rd->last_r] == rf->len &&
      same_bytes(t->arena + t->off[rd->last_r], rf->p, rf->len))
    r = rd->last_r;
  else {
    r = ntab_find(t, rf->p, rf->len);
    if (r == (size_t)-1) {
      int rc = region_new(rd, rf, rd->ri, &r);
      if (rc)
        return rc;
    } else if (rd->rg[r].left)
      rd->fn_off = 1; /* more rows for a region already handed out */
    if (rd->have_last) {
      int rc = region_left(rd, rd->last_r);
      if (rc)
        return rc;
    }
    rd->last_r = r;
    rd->have_last = 1;
  }
  int32_t day;
  field *df = &rd->f[rd->di];
  int rc = field_date(rd, df, rd->di, &day);
  if (rc)
    return rc;
  for (size_t k = 0; k < rd->nval; k++) {
    size_t j = rd->vfield[k];
    if ((rc = field_count(rd, &rd->f[j], j, &rd->vtmp[k])))
      return rc;
  }
  uint32_t earlier = 0;
  rc = region_put(rd, r, day, rd->vtmp, line32(rd->line), &earlier);
  return rc ? put_failed(rd, rc, r, df, earlier) : TWOFOLD_OK;
}

static int wide_record(reader *rd) {
  int32_t day;
  field *df = &rd->f[rd->di];
  int rc = field_date(rd, df, rd->di, &day);
  if (rc)
    return rc;
  for (size_t j = 0; j < rd->nhead; j++) {
    if (j == rd->di)
      continue;
    double v;
    if ((rc = field_count(rd, &rd->f[j], j, &v)))
      return rc;
    uint32_t earlier = 0;
    size_t r = rd->reg_of[j];
    rc = region_put(rd, r, day, &v, line32(rd->line), &earlier);
    if (rc)
      return put_failed(rd, rc, r, df, earlier);
  }
  return TWOFOLD_OK;
}

/* ------------------------------------------------------------------ */
/* Building the set                                                    */
/* ------------------------------------------------------------------ */

static int build(reader *rd, twofold_set **out) {
  twofold_set *set;
  if (twofold_set_new(&set))
    return fail(rd, TWOFOLD_ENOMEM, 0, 0, "out of memory");
  for (size_t r = 0; r < rd->nrg; r++) {
    region *g = &rd->rg[r];
    size_t n = (size_t)(g->hi - g->lo + 1);
    size_t from = (size_t)(g->lo - g->base);
    twofold_series *s = calloc(1, sizeof *s);
    int ok = s != NULL;
    if (ok) {
      s->region = tf_strdup(ntab_name(&rd->regs, r));
      s->names = calloc(rd->nval, sizeof *s->names);
      s->values = calloc(rd->nval, sizeof *s->values);
      s->first_day = g->lo;
      s->length = n;
      s->cap = rd->nval;
      ok = s->region && s->names && s->values;
    }
    for (size_t c = 0; ok && c < rd->nval; c++) {
      const char *nm =
          rd->wide ? "count" : ntab_name(&rd->cols, rd->vfield[c]);
      s->names[c] = tf_strdup(nm);
      double *v = g->vals[c];
      if (from)
        memmove(v, v + from, n * sizeof *v);
      double *shrunk = realloc(v, n * sizeof *v);
      s->values[c] = shrunk ? shrunk : v;
      g->vals[c] = NULL;
      s->ncol = c + 1;
      ok = s->names[c] != NULL;
    }
    free(g->lines);
    g->lines = NULL;
    if (!ok || twofold_set_add(set, s) != TWOFOLD_OK) {
      twofold_series_free(s);
      twofold_set_free(set);
      return fail(rd, TWOFOLD_ENOMEM, 0, 0, "out of memory");
    }
  }
  *out = set;
  return TWOFOLD_OK;
}

/* ------------------------------------------------------------------ */
/* Entry points                                                        */
/* ------------------------------------------------------------------ */

static void reader_free(reader *rd) {
  source_close(&rd->src);
  free(rd->buf);
  free(rd->f);
  ntab_free(&rd->cols);
  ntab_free(&rd->regs);
  for (size_t r = 0; r < rd->nrg; r++)
    region_free(&rd->rg[r], rd->nval);
  free(rd->rg);
  free(rd->vfield);
  free(rd->reg_of);
  free(rd->vtmp);
  free(rd->fn_names);
  free(rd->fn_vals);
}

static int run(reader *rd, twofold_set **out) {
  int rc = source_open(rd);
  if (rc)
    return rc;
  rd->buf = malloc(BUF_INITIAL + 1);
  if (rd->buf == NULL)
    return fail(rd, TWOFOLD_ENOMEM, 0, 0, "out of memory");
  rd->cap = BUF_INITIAL;
  rd->buf[0] = '\0';
  if ((rc = refill(rd)))
    return rc;
  if (rd->len >= 3 && rd->buf[0] == 0xef && rd->buf[1] == 0xbb &&
      rd->buf[2] == 0xbf)
    rd->pos = 3;
  if ((rc = read_header(rd)))
    return rc;
  long header_line = rd->line;
  rd->line += rd->rec_lines;
  for (;;) {
    rc = next_record(rd);
    if (rc == 1)
      break;
    if (rc)
      return rc;
    if (rd->nf != rd->nhead)
      return fields_mismatch(rd);
    rc = rd->wide ? wide_record(rd) : long_record(rd);
    if (rc)
      return rc;
    rd->rows++;
    rd->line += rd->rec_lines;
  }
  if (rd->rows == 0)
    return fail(rd, TWOFOLD_EEMPTY, header_line, 0,
                "a header but no data rows");
  return build(rd, out);
}

/* After an error in the data of a gzip stream, check the rest of the
 * stream: damaged compressed data can decode to garbage before zlib sees
 * the damage (at the latest through the CRC-32 in the trailer), and then
 * the damage is what to report. */
static int check_gzip_rest(reader *rd, int rc) {
  source *s = &rd->src;
  if (!s->gz || rc == TWOFOLD_EGZIP || rc == TWOFOLD_ENOMEM ||
      rc == TWOFOLD_EIO)
    return rc;
  unsigned char tmp[16384];
  while (s->pend == 0) {
    size_t got;
    s->pend = gz_any_read(s, tmp, sizeof tmp, &got);
    if (s->pend == 0 && got < sizeof tmp)
      return rc; /* the stream is sound: the data error stands */
  }
  if (s->pend != TWOFOLD_EGZIP)
    return rc;
  return fail(rd, TWOFOLD_EGZIP, rd->err_line, 0,
              "%s; the data decompressed up to here is damaged", s->msg);
}

static int read_any(const unsigned char *mem, size_t size, int fd,
                    const char *name, const twofold_read_options *opts,
                    twofold_set **out, twofold_error *err) {
  if (err)
    memset(err, 0, sizeof *err);
  if (out == NULL)
    return tf_error_set(err, TWOFOLD_EINVAL, name, 0, 0,
                        "no place for the result");
  *out = NULL;
  twofold_read_options defaults;
  char defregion[] = "region", defdate[] = "date";
  if (opts == NULL) {
    defaults.layout = TWOFOLD_LAYOUT_AUTO;
    defaults.region = defregion;
    defaults.date = defdate;
    defaults.count = NULL;
    defaults.fn = NULL;
    defaults.fn_arg = NULL;
    opts = &defaults;
  }
  reader *rd = calloc(1, sizeof *rd);
  if (rd == NULL)
    return tf_error_set(err, TWOFOLD_ENOMEM, name, 0, 0, "out of memory");
  rd->name = name;
  rd->err = err;
  rd->opts = opts;
  rd->line = 1;
  rd->src.mem = mem;
  rd->src.memlen = size;
  rd->src.fd = fd;
  int rc = run(rd, out);
  if (rc)
    rc = check_gzip_rest(rd, rc);
  reader_free(rd);
  free(rd);
  if (rc)
    *out = NULL;
  return rc;
}

int twofold_read_memory(const void *data, size_t size, const char *name,
                        const twofold_read_options *opts, twofold_set **out,
                        twofold_error *err) {
  if (name == NULL)
    name = "<memory>";
  if (data == NULL && size > 0) {
    if (out)
      *out = NULL;
    if (err)
      memset(err, 0, sizeof *err);
    return tf_error_set(err, TWOFOLD_EINVAL, name, 0, 0, "no data");
  }
  static const unsigned char none[1] = {0};
  return read_any(data ? data : none, data ? size : 0, -1, name, opts, out,
                  err);
}

int twofold_read_fd(int fd, const char *name,
                    const twofold_read_options *opts, twofold_set **out,
                    twofold_error *err) {
  if (name == NULL)
    name = fd == 0 ? "<stdin>" : "<fd>";
  if (fd < 0) {
    if (out)
      *out = NULL;
    if (err)
      memset(err, 0, sizeof *err);
    return tf_error_set(err, TWOFOLD_EINVAL, name, 0, 0,
                        "invalid file descriptor");
  }
  return read_any(NULL, 0, fd, name, opts, out, err);
}

int twofold_read_file(const char *path, const twofold_read_options *opts,
                      twofold_set **out, twofold_error *err) {
  if (out)
    *out = NULL;
  if (path == NULL) {
    if (err)
      memset(err, 0, sizeof *err);
    return tf_error_set(err, TWOFOLD_EINVAL, NULL, 0, 0, "no path");
  }
  int fd;
  do
    fd = open(path, O_RDONLY | O_CLOEXEC);
  while (fd < 0 && errno == EINTR);
  if (fd < 0) {
    int e = errno;
    char buf[128];
    if (strerror_r(e, buf, sizeof buf) != 0)
      snprintf(buf, sizeof buf, "error %d", e);
    if (err)
      memset(err, 0, sizeof *err);
    return tf_error_set(err, TWOFOLD_EIO, path, 0, 0, "cannot open: %s",
                        buf);
  }
  int rc = read_any(NULL, 0, fd, path, opts, out, err);
  close(fd);
  return rc;
}
