/*
 * quern.h: the C interface of quern's frozen models.
 *
 * Build the libraries from the quern repository (no RocksDB, no C++):
 *
 *   cargo rustc --release --lib --no-default-features --features capi \
 *       --crate-type staticlib,cdylib
 *
 * which leaves target/release/libquern.a and libquern.so. Link the static
 * one with: cc app.c -Isrc/capi target/release/libquern.a -lpthread -ldl -lm
 *
 * Conventions, for every function:
 *   - No function unwinds into C or aborts on bad input: a failure returns
 *     NULL, NaN or -1 (each function says which) and sets the calling
 *     thread's last error, read with quern_last_error().
 *   - Strings in are NUL-terminated UTF-8. Strings out are owned by the
 *     object they come from and live as long as it.
 *   - Text is prepared as the model's text was at ingest (Unicode
 *     normalization, lowercasing, tokens, digits): a query never repeats
 *     those choices.
 *
 * Threads: a quern_model is immutable once open. Any number of threads
 * may query one model at once; close it once, after every query on it has
 * returned. The last error is kept per thread.
 *
 * This header is checked against src/capi/mod.rs by scripts/check-capi.
 */
#ifndef QUERN_H
#define QUERN_H

#include <stddef.h>
#include <stdint.h>

#ifdef __cplusplus
extern "C" {
#endif

/* An open model. */
typedef struct quern_model quern_model;

/* The top next words of one query. */
typedef struct quern_words quern_words;

/* The totals of scoring a text, as `quern score --json` reports them. */
typedef struct quern_score {
    uint64_t sentences;   /* sentences scored */
    uint64_t predictions; /* the words of each sentence and its end */
    uint64_t oov;         /* predictions of words outside the vocabulary */
    uint64_t zero;        /* predictions that got probability 0 */
    double log10_prob;    /* sum of the log10 probabilities (-inf if one is 0) */
    double perplexity;    /* 10^(-log10_prob / predictions); +inf if one is 0,
                             NaN if there was nothing to score */
} quern_score;

/* The calling thread's last error: a message naming the file or argument,
 * valid until the thread's next failing call; "" before any failure. */
const char *quern_last_error(void);

/* Opens a model file, checking its header, directory and their checksums
 * (a truncated or damaged file is refused). NULL on failure. */
quern_model *quern_model_open(const char *path);

/* Closes a model; NULL is ignored. */
void quern_model_close(quern_model *model);

/* The model's order N; -1 if model is NULL. */
int quern_model_order(const quern_model *model);

/* The vocabulary size |V| (</s> and <unk> included, <s> not); 0 if model
 * is NULL. */
uint64_t quern_model_vocabulary_size(const quern_model *model);

/* log10 P(word | context). context is words separated by spaces and may
 * begin with <s>; only its last N - 1 words count; words outside the
 * vocabulary are scored as <unk>. NaN on failure. */
double quern_model_log10(const quern_model *model, const char *context, const char *word);

/* The k most probable next words after context that begin with prefix
 * (NULL or "" for any word), best first, ties broken by the words' bytes:
 * the words of `quern next --json`. With folded non-zero the prefix
 * matches without regard to case and accents (`--match folded`: "gu"
 * offers "Guillemot"), each word shown as the model has it. NULL context:
 * the empty context. Free the answer with quern_words_free. NULL on
 * failure. */
quern_words *quern_model_next(const quern_model *model, const char *context, const char *prefix,
                              int folded, size_t k);

/* How many words an answer holds; 0 for NULL. */
size_t quern_words_count(const quern_words *words);

/* Word i of an answer, as the model has it; NULL if i is out of range. */
const char *quern_words_word(const quern_words *words, size_t i);

/* The log10 probability of word i; NaN if i is out of range. */
double quern_words_log10(const quern_words *words, size_t i);

/* Frees an answer; NULL is ignored. */
void quern_words_free(quern_words *words);

/* Scores text as `quern score` scores a file: each line is a sentence (or
 * the sentences the model's preparation cuts it into), its words and </s>
 * predicted after <s>. Fills *out; 0 on success, -1 on failure. */
int quern_model_score(const quern_model *model, const char *text, quern_score *out);

#ifdef __cplusplus
}
#endif

#endif /* QUERN_H */
