/*
 * Drives quern's C interface for scripts/check-capi.
 *
 *   check MODEL        reads queries from standard input, one a line,
 *                      fields separated by tabs, and prints one answer a line:
 *     prob CONTEXT WORD         -> "prob\t<log10 with %.17g>"
 *     next CONTEXT PREFIX K [folded] -> "next\t<n>" then "\t<word>\t<log10>" per word
 *     score FILE                -> "score\t<sentences>\t<predictions>\t<oov>\t<zero>\t<log10>\t<perplexity>"
 *     info                      -> "info\t<order>\t<vocabulary size>"
 *   check --open FILE  opens FILE only: prints "opened" (exit 0) or
 *                      "refused\t<last error>" (exit 3).
 *   check --threads MODEL CONTEXT WORD
 *                      asks 4 threads the same query 10,000 times each and
 *                      prints "same" if every answer equals the first.
 */
#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "quern.h"

static char *read_file(const char *path) {
    FILE *f = fopen(path, "rb");
    if (!f) return NULL;
    size_t cap = 1 << 16, len = 0;
    char *buf = malloc(cap);
    size_t n;
    while ((n = fread(buf + len, 1, cap - len - 1, f)) > 0) {
        len += n;
        if (cap - len - 1 == 0) {
            cap *= 2;
            buf = realloc(buf, cap);
        }
    }
    fclose(f);
    buf[len] = 0;
    return buf;
}

struct job {
    const quern_model *m;
    const char *context, *word;
    double first;
    int same;
};

static void *ask(void *arg) {
    struct job *j = arg;
    j->same = 1;
    for (int i = 0; i < 10000; i++) {
        double x = quern_model_log10(j->m, j->context, j->word);
        if (memcmp(&x, &j->first, sizeof x) != 0) j->same = 0;
    }
    return NULL;
}

int main(int argc, char **argv) {
    if (argc == 3 && strcmp(argv[1], "--open") == 0) {
        quern_model *m = quern_model_open(argv[2]);
        if (!m) {
            printf("refused\t%s\n", quern_last_error());
            return 3;
        }
        printf("opened\n");
        quern_model_close(m);
        return 0;
    }
    if (argc == 5 && strcmp(argv[1], "--threads") == 0) {
        quern_model *m = quern_model_open(argv[2]);
        if (!m) {
            printf("refused\t%s\n", quern_last_error());
            return 3;
        }
        struct job jobs[4];
        pthread_t t[4];
        double first = quern_model_log10(m, argv[3], argv[4]);
        for (int i = 0; i < 4; i++) {
            jobs[i] = (struct job){m, argv[3], argv[4], first, 0};
            pthread_create(&t[i], NULL, ask, &jobs[i]);
        }
        int same = 1;
        for (int i = 0; i < 4; i++) {
            pthread_join(t[i], NULL);
            same &= jobs[i].same;
        }
        printf(same ? "same\n" : "different\n");
        quern_model_close(m);
        return same ? 0 : 1;
    }
    if (argc != 2) {
        fprintf(stderr, "usage: check MODEL | check --open FILE | check --threads MODEL CONTEXT WORD\n");
        return 2;
    }
    quern_model *m = quern_model_open(argv[1]);
    if (!m) {
        fprintf(stderr, "check: %s\n", quern_last_error());
        return 1;
    }
    char line[65536];
    while (fgets(line, sizeof line, stdin)) {
        line[strcspn(line, "\n")] = 0;
        char *fields[5] = {0};
        int n = 0;
        for (char *p = line; n < 5;) {
            fields[n++] = p;
            char *tab = strchr(p, '\t');
            if (!tab) break;
            *tab = 0;
            p = tab + 1;
        }
        if (strcmp(fields[0], "info") == 0) {
            printf("info\t%d\t%llu\n", quern_model_order(m),
                   (unsigned long long)quern_model_vocabulary_size(m));
        } else if (strcmp(fields[0], "prob") == 0 && n == 3) {
            double x = quern_model_log10(m, fields[1], fields[2]);
            if (isnan(x)) printf("error\t%s\n", quern_last_error());
            else printf("prob\t%.17g\n", x);
        } else if (strcmp(fields[0], "next") == 0 && (n == 4 || n == 5)) {
            int folded = n == 5 && strcmp(fields[4], "folded") == 0;
            quern_words *w =
                quern_model_next(m, fields[1], fields[2], folded, (size_t)atol(fields[3]));
            if (!w) {
                printf("error\t%s\n", quern_last_error());
                continue;
            }
            size_t count = quern_words_count(w);
            printf("next\t%zu", count);
            for (size_t i = 0; i < count; i++)
                printf("\t%s\t%.17g", quern_words_word(w, i), quern_words_log10(w, i));
            printf("\n");
            quern_words_free(w);
        } else if (strcmp(fields[0], "score") == 0 && n == 2) {
            char *text = read_file(fields[1]);
            quern_score s;
            if (!text || quern_model_score(m, text, &s) != 0) {
                printf("error\t%s\n", text ? quern_last_error() : "cannot read the file");
            } else {
                printf("score\t%llu\t%llu\t%llu\t%llu\t%.17g\t%.17g\n",
                       (unsigned long long)s.sentences, (unsigned long long)s.predictions,
                       (unsigned long long)s.oov, (unsigned long long)s.zero, s.log10_prob,
                       s.perplexity);
            }
            free(text);
        } else {
            printf("error\tunknown query\n");
        }
        fflush(stdout);
    }
    quern_model_close(m);
    return 0;
}
