/*
 * test_svg.c — the figures (server/svg_*.c) and pages (server/page_*.c)
 * without the daemon.
 *
 * Every SVG text goes through a strict XML 1.0 well-formedness checker
 * written here (W3C XML 1.0, 5th edition: §2.2 Char, §2.3 Name, §2.4
 * character data, §3.1 tags and attributes — unique attribute names,
 * no '<' in values —, §4.1 character and entity references, §2.8 prolog),
 * which also builds a small tree to query.  The checker is itself tested on
 * malformed inputs, so that a pass means something.
 *
 * Geometry is checked against the figure's own axes: the tick marks
 * (<g class="tick-y" transform="translate(x,y)"> with the value as text)
 * give the data→pixel map, and a bar or stick must reach the pixel of the
 * value computed here independently.  Coordinates are written with two
 * decimals, so positions agree within 0.02 px.
 *
 * Reference values: for n = 2 atoms the Schur–Weyl law is P((2)) =
 * h₂(p) = (1 + P₂)/2 and P((1,1)) = e₂(p) = (1 − P₂)/2 (f = 1 for both;
 * domain notes §1, complete and elementary symmetric polynomials), content
 * sums c((2)) = 1, c((1,1)) = −1 (by hand).  For n = 6, d = 3 the seven
 * diagrams (OEIS A026820: 7) have contents 15, 9, 5, 3, 3, 0, −3 (by hand;
 * (4,1,1) and (3,3) share 3, domain notes §2).
 */
#include <criterion/criterion.h>
#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include "page.h"
#include "svg_figures.h"
#include "svg_model.h"
#include "svg_plot.h"

/* ------------------------------------------------------------------------ */
/* A strict XML well-formedness checker with a small tree.                   */

#define XA_MAX 48

typedef struct xnode {
    char name[64];
    char *an[XA_MAX], *av[XA_MAX]; /* attribute names and decoded values */
    int nattr;
    struct xnode **kids;
    size_t nkids, capkids;
    char *text; /* decoded character data directly inside */
    size_t tlen;
} xnode;

typedef struct {
    const unsigned char *s;
    size_t i, n;
    char err[200];
    int depth;
} xparser;

static void xml_free(xnode *x) {
    if (x == NULL)
        return;
    for (int k = 0; k < x->nattr; k++) {
        free(x->an[k]);
        free(x->av[k]);
    }
    for (size_t k = 0; k < x->nkids; k++)
        xml_free(x->kids[k]);
    free(x->kids);
    free(x->text);
    free(x);
}

static int xp_fail(xparser *p, const char *what) {
    if (p->err[0] == '\0')
        snprintf(p->err, sizeof p->err, "%s at byte %zu", what, p->i);
    return 0;
}

/* Decodes one UTF-8 character at s (n bytes left); 0 when invalid. */
static size_t xp_utf8(const unsigned char *s, size_t n, unsigned long *cp) {
    if (n == 0)
        return 0;
    unsigned char c = s[0];
    size_t len;
    unsigned long v, min;
    if (c < 0x80) {
        *cp = c;
        return 1;
    } else if (c >= 0xc2 && c <= 0xdf) {
        len = 2;
        v = c & 0x1fu;
        min = 0x80;
    } else if (c >= 0xe0 && c <= 0xef) {
        len = 3;
        v = c & 0x0fu;
        min = 0x800;
    } else if (c >= 0xf0 && c <= 0xf4) {
        len = 4;
        v = c & 0x07u;
        min = 0x10000;
    } else
        return 0;
    if (len > n)
        return 0;
    for (size_t k = 1; k < len; k++) {
        if ((s[k] & 0xc0) != 0x80)
            return 0;
        v = (v << 6) | (s[k] & 0x3fu);
    }
    if (v < min || v > 0x10ffff || (v >= 0xd800 && v <= 0xdfff))
        return 0;
    *cp = v;
    return len;
}

/* XML 1.0 §2.2 Char. */
static int xp_is_char(unsigned long c) {
    return c == 0x9 || c == 0xa || c == 0xd || (c >= 0x20 && c <= 0xd7ff) ||
           (c >= 0xe000 && c <= 0xfffd) || (c >= 0x10000 && c <= 0x10ffff);
}

static int xp_name_start(unsigned char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_' ||
           c == ':' || c >= 0x80;
}

static int xp_name_char(unsigned char c) {
    return xp_name_start(c) || (c >= '0' && c <= '9') || c == '-' || c == '.';
}

static int xp_ws(unsigned char c) {
    return c == ' ' || c == '\t' || c == '\n' || c == '\r';
}

static int xp_starts(xparser *p, const char *lit) {
    size_t n = strlen(lit);
    return p->i + n <= p->n && memcmp(p->s + p->i, lit, n) == 0;
}

static void xp_skip_ws(xparser *p) {
    while (p->i < p->n && xp_ws(p->s[p->i]))
        p->i++;
}

static int xp_name(xparser *p, char *out, size_t cap) {
    size_t start = p->i;
    if (p->i >= p->n || !xp_name_start(p->s[p->i]))
        return xp_fail(p, "a name expected");
    while (p->i < p->n && xp_name_char(p->s[p->i]))
        p->i++;
    size_t len = p->i - start;
    if (len >= cap)
        return xp_fail(p, "name too long");
    memcpy(out, p->s + start, len);
    out[len] = '\0';
    return 1;
}

static void xp_put_utf8(char **buf, size_t *len, unsigned long cp) {
    char tmp[4];
    size_t n;
    if (cp < 0x80) {
        tmp[0] = (char)cp;
        n = 1;
    } else if (cp < 0x800) {
        tmp[0] = (char)(0xc0 | (cp >> 6));
        tmp[1] = (char)(0x80 | (cp & 0x3f));
        n = 2;
    } else if (cp < 0x10000) {
        tmp[0] = (char)(0xe0 | (cp >> 12));
        tmp[1] = (char)(0x80 | ((cp >> 6) & 0x3f));
        tmp[2] = (char)(0x80 | (cp & 0x3f));
        n = 3;
    } else {
        tmp[0] = (char)(0xf0 | (cp >> 18));
        tmp[1] = (char)(0x80 | ((cp >> 12) & 0x3f));
        tmp[2] = (char)(0x80 | ((cp >> 6) & 0x3f));
        tmp[3] = (char)(0x80 | (cp & 0x3f));
        n = 4;
    }
    *buf = realloc(*buf, *len + n + 1);
    cr_assert_not_null(*buf);
    memcpy(*buf + *len, tmp, n);
    *len += n;
    (*buf)[*len] = '\0';
}

static void xp_put_bytes(char **buf, size_t *len, const unsigned char *s,
                         size_t n) {
    *buf = realloc(*buf, *len + n + 1);
    cr_assert_not_null(*buf);
    memcpy(*buf + *len, s, n);
    *len += n;
    (*buf)[*len] = '\0';
}

/* A reference after '&' (§4.1; only the five predefined entities). */
static int xp_reference(xparser *p, char **buf, size_t *len) {
    p->i++; /* '&' */
    size_t semi = p->i;
    while (semi < p->n && semi - p->i < 12 && p->s[semi] != ';')
        semi++;
    if (semi >= p->n || p->s[semi] != ';')
        return xp_fail(p, "'&' not followed by a reference");
    const char *r = (const char *)p->s + p->i;
    size_t rl = semi - p->i;
    unsigned long cp = 0;
    if (rl >= 2 && r[0] == '#') {
        char digits[16];
        int hex = r[1] == 'x';
        size_t from = hex ? 2 : 1;
        if (rl - from == 0 || rl - from >= sizeof digits)
            return xp_fail(p, "bad character reference");
        memcpy(digits, r + from, rl - from);
        digits[rl - from] = '\0';
        for (size_t k = 0; digits[k]; k++)
            if (!(hex ? strchr("0123456789abcdefABCDEF", digits[k])
                      : strchr("0123456789", digits[k])))
                return xp_fail(p, "bad character reference");
        cp = strtoul(digits, NULL, hex ? 16 : 10);
        if (!xp_is_char(cp))
            return xp_fail(p, "reference to a character XML forbids");
    } else if (rl == 2 && memcmp(r, "lt", 2) == 0)
        cp = '<';
    else if (rl == 2 && memcmp(r, "gt", 2) == 0)
        cp = '>';
    else if (rl == 3 && memcmp(r, "amp", 3) == 0)
        cp = '&';
    else if (rl == 4 && memcmp(r, "quot", 4) == 0)
        cp = '"';
    else if (rl == 4 && memcmp(r, "apos", 4) == 0)
        cp = '\'';
    else
        return xp_fail(p, "undeclared entity");
    xp_put_utf8(buf, len, cp);
    p->i = semi + 1;
    return 1;
}

static int xp_comment(xparser *p) {
    p->i += 4; /* "<!--" */
    while (p->i + 1 < p->n && !(p->s[p->i] == '-' && p->s[p->i + 1] == '-'))
        p->i++;
    if (!xp_starts(p, "-->"))
        return xp_fail(p, "'--' inside or unterminated comment");
    p->i += 3;
    return 1;
}

static int xp_pi(xparser *p) {
    p->i += 2;
    char target[64];
    if (!xp_name(p, target, sizeof target))
        return 0;
    if (strcasecmp(target, "xml") == 0)
        return xp_fail(p, "XML declaration not at the start");
    while (p->i + 1 < p->n && !(p->s[p->i] == '?' && p->s[p->i + 1] == '>'))
        p->i++;
    if (!xp_starts(p, "?>"))
        return xp_fail(p, "unterminated processing instruction");
    p->i += 2;
    return 1;
}

static xnode *xp_element(xparser *p);

static int xp_content(xparser *p, xnode *x) {
    for (;;) {
        if (p->i >= p->n)
            return xp_fail(p, "end of input inside an element");
        if (xp_starts(p, "</")) {
            p->i += 2;
            char name[64];
            if (!xp_name(p, name, sizeof name))
                return 0;
            if (strcmp(name, x->name) != 0)
                return xp_fail(p, "end tag does not match the start tag");
            xp_skip_ws(p);
            if (p->i >= p->n || p->s[p->i] != '>')
                return xp_fail(p, "'>' expected after the end tag name");
            p->i++;
            return 1;
        }
        if (xp_starts(p, "<!--")) {
            if (!xp_comment(p))
                return 0;
        } else if (xp_starts(p, "<![CDATA[")) {
            p->i += 9;
            size_t start = p->i;
            while (p->i < p->n && !xp_starts(p, "]]>"))
                p->i++;
            if (p->i >= p->n)
                return xp_fail(p, "unterminated CDATA section");
            xp_put_bytes(&x->text, &x->tlen, p->s + start, p->i - start);
            p->i += 3;
        } else if (xp_starts(p, "<?")) {
            if (!xp_pi(p))
                return 0;
        } else if (p->s[p->i] == '<') {
            xnode *kid = xp_element(p);
            if (kid == NULL)
                return 0;
            if (x->nkids == x->capkids) {
                x->capkids = x->capkids ? 2 * x->capkids : 8;
                x->kids = realloc(x->kids, x->capkids * sizeof *x->kids);
                cr_assert_not_null(x->kids);
            }
            x->kids[x->nkids++] = kid;
        } else if (p->s[p->i] == '&') {
            if (!xp_reference(p, &x->text, &x->tlen))
                return 0;
        } else {
            if (xp_starts(p, "]]>"))
                return xp_fail(p, "']]>' in character data");
            xp_put_bytes(&x->text, &x->tlen, p->s + p->i, 1);
            p->i++;
        }
    }
}

static xnode *xp_element(xparser *p) {
    if (++p->depth > 200) {
        xp_fail(p, "nesting too deep");
        return NULL;
    }
    p->i++; /* '<' */
    xnode *x = calloc(1, sizeof *x);
    cr_assert_not_null(x);
    if (!xp_name(p, x->name, sizeof x->name))
        goto fail;
    for (;;) {
        size_t before = p->i;
        xp_skip_ws(p);
        if (p->i >= p->n) {
            xp_fail(p, "end of input in a tag");
            goto fail;
        }
        if (xp_starts(p, "/>")) {
            p->i += 2;
            p->depth--;
            return x;
        }
        if (p->s[p->i] == '>') {
            p->i++;
            if (!xp_content(p, x))
                goto fail;
            p->depth--;
            return x;
        }
        if (p->i == before) {
            xp_fail(p, "whitespace required before an attribute");
            goto fail;
        }
        char name[64];
        if (!xp_name(p, name, sizeof name))
            goto fail;
        for (int k = 0; k < x->nattr; k++)
            if (strcmp(x->an[k], name) == 0) {
                xp_fail(p, "duplicate attribute");
                goto fail;
            }
        xp_skip_ws(p);
        if (p->i >= p->n || p->s[p->i] != '=') {
            xp_fail(p, "'=' expected after an attribute name");
            goto fail;
        }
        p->i++;
        xp_skip_ws(p);
        if (p->i >= p->n || (p->s[p->i] != '"' && p->s[p->i] != '\'')) {
            xp_fail(p, "attribute value not quoted");
            goto fail;
        }
        unsigned char q = p->s[p->i++];
        char *val = calloc(1, 1);
        size_t vlen = 0;
        cr_assert_not_null(val);
        while (p->i < p->n && p->s[p->i] != q) {
            if (p->s[p->i] == '<') {
                free(val);
                xp_fail(p, "'<' in an attribute value");
                goto fail;
            }
            if (p->s[p->i] == '&') {
                if (!xp_reference(p, &val, &vlen)) {
                    free(val);
                    goto fail;
                }
                continue;
            }
            xp_put_bytes(&val, &vlen, p->s + p->i, 1);
            p->i++;
        }
        if (p->i >= p->n) {
            free(val);
            xp_fail(p, "unterminated attribute value");
            goto fail;
        }
        p->i++;
        if (x->nattr == XA_MAX) {
            free(val);
            xp_fail(p, "too many attributes for this checker");
            goto fail;
        }
        x->an[x->nattr] = strdup(name);
        x->av[x->nattr++] = val;
    }
fail:
    xml_free(x);
    return NULL;
}

static int xp_misc(xparser *p) {
    for (;;) {
        xp_skip_ws(p);
        if (xp_starts(p, "<!--")) {
            if (!xp_comment(p))
                return 0;
        } else if (xp_starts(p, "<?")) {
            if (!xp_pi(p))
                return 0;
        } else if (xp_starts(p, "<!")) {
            return xp_fail(p, "DOCTYPE or other declaration not expected");
        } else
            return 1;
    }
}

/* The document's root element, or NULL with err filled. */
static xnode *xml_parse(const char *text, size_t n, char *err, size_t cap) {
    xparser p = {(const unsigned char *)text, 0, n, "", 0};
    /* §2.2: the whole text is characters XML allows, in valid UTF-8 */
    for (size_t i = 0; i < n;) {
        unsigned long cp = 0;
        size_t len = xp_utf8(p.s + i, n - i, &cp);
        if (len == 0 || !xp_is_char(cp)) {
            p.i = i;
            xp_fail(&p, len == 0 ? "invalid UTF-8" : "a character XML forbids");
            snprintf(err, cap, "%s", p.err);
            return NULL;
        }
        i += len;
    }
    xnode *root = NULL;
    if (xp_starts(&p, "<?xml") && p.n > 5 && xp_ws(p.s[5])) {
        const char *end = strstr(text, "?>");
        if (end == NULL || strstr(text, "version=\"1.0\"") == NULL ||
            strstr(text, "version=\"1.0\"") > end)
            xp_fail(&p, "malformed XML declaration");
        else
            p.i = (size_t)(end - text) + 2;
    }
    if (p.err[0] == '\0' && xp_misc(&p)) {
        if (p.i < p.n && p.s[p.i] == '<')
            root = xp_element(&p);
        else
            xp_fail(&p, "no root element");
    }
    if (root != NULL && xp_misc(&p) && p.i != p.n) {
        xp_fail(&p, "content after the root element");
    }
    if (p.err[0] != '\0') {
        xml_free(root);
        snprintf(err, cap, "%s", p.err);
        return NULL;
    }
    return root;
}

static const char *xml_attr(const xnode *x, const char *name) {
    for (int k = 0; k < x->nattr; k++)
        if (strcmp(x->an[k], name) == 0)
            return x->av[k];
    return NULL;
}

static double xml_num(const xnode *x, const char *name) {
    const char *v = xml_attr(x, name);
    cr_assert_not_null(v, "<%s> has no %s", x->name, name);
    return strtod(v, NULL);
}

/* Elements named `name` (NULL: any) with class `cls` (NULL: any), in
 * document order. */
static size_t xml_find(const xnode *x, const char *name, const char *cls,
                       const xnode **out, size_t cap, size_t n) {
    const char *c = xml_attr(x, "class");
    if ((name == NULL || strcmp(x->name, name) == 0) &&
        (cls == NULL || (c && strcmp(c, cls) == 0))) {
        if (n < cap)
            out[n] = x;
        n++;
    }
    for (size_t k = 0; k < x->nkids; k++)
        n = xml_find(x->kids[k], name, cls, out, cap, n);
    return n;
}

/* The text of x and its descendants into out. */
static void xml_text(const xnode *x, char *out, size_t cap) {
    if (x->text)
        strncat(out, x->text, cap - strlen(out) - 1);
    for (size_t k = 0; k < x->nkids; k++)
        xml_text(x->kids[k], out, cap);
}

/* Parses and asserts well-formedness. */
static xnode *xml_ok(const char *text, const char *what) {
    char err[256] = "";
    xnode *root = xml_parse(text, strlen(text), err, sizeof err);
    cr_assert_not_null(root, "%s is not well-formed XML: %s", what, err);
    return root;
}

/* The text of the figure's one <desc> element. */
static void svg_desc_text(const xnode *root, char *out, size_t cap) {
    const xnode *found[4];
    cr_assert_eq(xml_find(root, "desc", NULL, found, 4, 0), 1);
    out[0] = '\0';
    xml_text(found[0], out, cap);
}

/* The data→pixel map of an axis read from its ticks: pos = a + b·value. */
typedef struct {
    double a, b;
    size_t n;
} axis_map;

static axis_map axis_read(const xnode *root, const char *cls, int vertical) {
    const xnode *ticks[64];
    size_t n = xml_find(root, "g", cls, ticks, 64, 0);
    cr_assert(n >= 2 && n <= 64, "%zu %s ticks", n, cls);
    double v[64], pos[64];
    for (size_t k = 0; k < n; k++) {
        double tx = 0, ty = 0;
        cr_assert(sscanf(xml_attr(ticks[k], "transform"), "translate(%lf,%lf)",
                         &tx, &ty) == 2);
        char label[64] = "";
        xml_text(ticks[k], label, sizeof label);
        v[k] = strtod(label, NULL);
        pos[k] = vertical ? ty : tx;
    }
    axis_map m = {0, 0, n};
    m.b = (pos[n - 1] - pos[0]) / (v[n - 1] - v[0]);
    m.a = pos[0] - m.b * v[0];
    /* every tick lies on that line: the labels and positions agree */
    for (size_t k = 0; k < n; k++)
        cr_assert(fabs(m.a + m.b * v[k] - pos[k]) < 0.02,
                  "tick %g of %s at %g, the line says %g", v[k], cls, pos[k],
                  m.a + m.b * v[k]);
    return m;
}

static double axis_at(axis_map m, double v) { return m.a + m.b * v; }

/* ------------------------------------------------------------------------ */
/* The checker itself: malformed texts are refused.                          */

Test(xml_checker, refuses_malformed_documents) {
    static const char *const bad[] = {
        "<a>",                          /* unclosed */
        "<a></b>",                      /* mismatched */
        "<a x=\"1\" x=\"2\"/>",         /* duplicate attribute */
        "<a x=1/>",                     /* unquoted */
        "<a x=\"<\"/>",                 /* '<' in a value */
        "<a>&</a>",                     /* raw ampersand */
        "<a>&nbsp;</a>",                /* undeclared entity */
        "<a>&#1;</a>",                  /* forbidden character reference */
        "<a>\x01</a>",                  /* forbidden character */
        "<a>\xff</a>",                  /* invalid UTF-8 */
        "<a/><b/>",                     /* two roots */
        "<a x=\"1\"y=\"2\"/>",          /* no space between attributes */
        "<a><!-- x -- y --></a>",       /* '--' in a comment */
        "<a>]]></a>",                   /* ']]>' in character data */
        "<!DOCTYPE a><a/>",             /* declarations are not expected */
        " <?xml version=\"1.0\"?><a/>", /* declaration not at the start */
        "",                             /* nothing */
    };
    for (size_t k = 0; k < sizeof bad / sizeof bad[0]; k++) {
        char err[256] = "";
        xnode *x = xml_parse(bad[k], strlen(bad[k]), err, sizeof err);
        cr_expect_null(x, "accepted: %s", bad[k]);
        cr_expect(err[0] != '\0');
        xml_free(x);
    }
    const char *good = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"
                       "<a q='&lt;&amp;&quot;&apos;&gt;&#65;&#x42;'><!-- c -->"
                       "<b/>t\xc3\xa9<![CDATA[<x>]]></a>\n";
    xnode *x = xml_ok(good, "the good sample");
    cr_assert_str_eq(xml_attr(x, "q"), "<&\"'>AB");
    cr_assert_str_eq(x->text, "t\xc3\xa9<x>");
    xml_free(x);
}

/* ------------------------------------------------------------------------ */
/* Fixtures: stored documents written by hand in the documented form         */
/* (api-spec/openapi.yaml, server/api_render.c, server/analysis_exec.h).     */

/* d = 2, n = 2, p = (0.7, 0.3): P₂ = 0.58.  Four per-shot readings with
 * offset 0, pair shift 0, J = 1, no noise: three at E = 1, one at E = −1
 * (mean 0.5, sample variance 1). */
static const char request_d2[] =
    "{\"levels\":2,\"calibration\":{\"offset\":0,\"pair_shift\":0,"
    "\"exchange\":1,\"noise_sd\":0,\"unit\":\"Hz\"},"
    "\"runs\":[{\"atoms\":2,\"energies\":[1,1,1,-1]}]}";
static const char result_d2[] =
    "{\"levels\":2,\"method\":\"likelihood\",\"confidence\":0.95,"
    "\"spectrum\":{\"interval\":\"delta-method\",\"values\":[0.7,0.3],"
    "\"stderr\":[0.05,0.05],\"lower\":[0.6,0.2],\"upper\":[0.8,0.4],"
    "\"estimate\":\"maximum-likelihood\"},"
    "\"purity\":{\"value\":0.58,\"stderr\":0.02},"
    "\"naive\":{\"spectrum\":[0.75,0.25]},\"flags\":[],"
    "\"runs\":[{\"atoms\":2,\"shots\":4,\"mean_energy\":0.5,"
    "\"energy_variance\":1,\"window_sd\":1,\"candidates_in_window\":2,"
    "\"candidates\":[{\"diagram\":[2],\"content\":1,\"energy\":1,\"z\":0.5,"
    "\"probability\":0.79,\"spectrum_estimate\":[1,0]},"
    "{\"diagram\":[1,1],\"content\":-1,\"energy\":-1,\"z\":-1.5,"
    "\"probability\":0.21,\"spectrum_estimate\":[0.5,0.5]}],"
    "\"degenerate_groups\":[]}],\"unit\":\"Hz\","
    "\"calibration\":{\"offset\":0,\"pair_shift\":0,\"exchange\":1,"
    "\"noise_sd\":0,\"unit\":\"Hz\",\"source\":\"request\"}}";

/* d = 3, n = 6, one summary run, J = 2 Hz: candidates (4,1,1) and (3,3)
 * share content 3 (a degenerate group), (4,2) has content 5; a flag of
 * each kind the page explains, and one it does not know. */
static const char result_d3[] =
    "{\"levels\":3,\"method\":\"moments\",\"confidence\":0.9,"
    "\"spectrum\":{\"interval\":\"delta-method\",\"values\":[0.6,0.3,0.1],"
    "\"stderr\":[0.04,0.03,null],\"lower\":[0.5,0.2,0.05],"
    "\"upper\":[0.7,0.4,0.15],\"estimate\":\"moments\"},"
    "\"purity\":{\"value\":0.46,\"stderr\":0.01},"
    "\"naive\":{\"spectrum\":[0.6666666666666666,0.16666666666666666,"
    "0.16666666666666666]},"
    "\"flags\":[{\"code\":\"degenerate-energy\",\"message\":\"(4,1,1) and "
    "(3,3) share content 3\",\"run\":0,\"content\":3},"
    "{\"code\":\"not-a-known-flag\",\"message\":\"m\",\"run\":null}],"
    "\"runs\":[{\"atoms\":6,\"shots\":400,\"mean_energy\":10.5,"
    "\"energy_variance\":20,\"window_sd\":4.5,\"candidates_in_window\":3,"
    "\"candidates\":["
    "{\"diagram\":[4,1,1],\"content\":3,\"energy\":6,\"z\":-1,"
    "\"probability\":0.2,\"spectrum_estimate\":[0.67,0.17,0.17]},"
    "{\"diagram\":[4,2],\"content\":5,\"energy\":10,\"z\":-0.1,"
    "\"probability\":0.3,\"spectrum_estimate\":[0.67,0.33,0]},"
    "{\"diagram\":[3,3],\"content\":3,\"energy\":6,\"z\":-1,"
    "\"probability\":0.1,\"spectrum_estimate\":[0.5,0.5,0]}],"
    "\"degenerate_groups\":[[[4,1,1],[3,3]]]}],\"unit\":\"Hz\","
    "\"calibration\":{\"offset\":0,\"pair_shift\":0,\"exchange\":2,"
    "\"noise_sd\":1.5,\"unit\":\"Hz\",\"source\":\"ref\","
    "\"name\":\"box-trap-b\",\"version\":2,"
    "\"valid_from\":\"2026-11-20T08:00:00.000Z\"}}";

/* d = 4, underdetermined: feasible ranges, no naive reading. */
static const char result_d4[] =
    "{\"levels\":4,\"method\":\"moments\",\"confidence\":0.95,"
    "\"spectrum\":{\"interval\":\"confidence-region\","
    "\"values\":[0.4,0.3,0.2,0.1],\"stderr\":[null,null,null,null],"
    "\"lower\":[0.3,0.2,0.1,0.0],\"upper\":[0.5,0.35,0.25,0.15],"
    "\"estimate\":\"maximum-entropy\"},"
    "\"feasible_ranges\":[[0.32,0.48],[0.22,0.33],[0.15,0.24],[0.02,0.12]],"
    "\"flags\":[{\"code\":\"underdetermined\",\"message\":\"d = 4\","
    "\"run\":null}],\"runs\":[{\"atoms\":5,\"shots\":600,\"mean_energy\":3,"
    "\"energy_variance\":4,\"window_sd\":2,\"candidates_in_window\":0,"
    "\"candidates\":[],\"degenerate_groups\":[]}],\"unit\":\"\"}";

static json_t *load(const char *text) {
    json_error_t jerr;
    json_t *doc = json_loads(text, 0, &jerr);
    cr_assert_not_null(doc, "fixture: %s", jerr.text);
    return doc;
}

static void analysis_of(const char *request, const char *result,
                        svg_analysis *a) {
    json_t *req = request ? load(request) : NULL;
    json_t *res = load(result);
    ss_error err;
    ss_error_clear(&err);
    ss_status st = svg_analysis_from_json(req, res, a, &err);
    cr_assert_eq(st, SS_OK, "%s", err.message);
    json_decref(req);
    json_decref(res);
}

static char *finish(page_text *t) {
    char *s = page_text_finish(t, NULL);
    cr_assert_not_null(s);
    return s;
}

/* ------------------------------------------------------------------------ */
/* Figure 1: readings.                                                       */

Test(svg, readings_bars_and_sticks_at_computed_heights) {
    svg_analysis a;
    analysis_of(request_d2, result_d2, &a);
    svg_law *laws = NULL;
    size_t count = 0, total = 0;
    ss_error err;
    ss_error_clear(&err);
    cr_assert_eq(svg_laws_compute(&a, NULL, 8, &laws, &count, &total, &err),
                 SS_OK);
    cr_assert_eq(count, 1);
    cr_assert_eq(laws[0].kind, SVG_LAW_FULL);
    page_text t;
    page_text_init(&t, 1024);
    svg_readings_write(&t, &a, laws, count, total, 1);
    char *svg = finish(&t);
    xnode *root = xml_ok(svg, "readings");
    cr_assert_str_eq(root->name, "svg");
    const xnode *found[64];
    cr_assert_eq(xml_find(root, "title", NULL, found, 64, 0), 1);
    char desc[1024];
    svg_desc_text(root, desc, sizeof desc);
    cr_expect(strstr(desc, "4 shots in 1 run (per-shot readings, binned)") !=
                  NULL,
              "%s", desc);

    axis_map ys = axis_read(root, "tick-y", 1),
             xs = axis_read(root, "tick-x", 0);
    /* the readings: 3 of 4 at E = 1, 1 of 4 at E = −1, bins one level
     * wide centred on the levels (tolerance: two-decimal coordinates) */
    size_t nb = xml_find(root, "rect", "hist-bar", found, 64, 0);
    cr_assert_eq(nb, 2, "%zu histogram bars", nb);
    const double want_e[2] = {-1.0, 1.0}, want_f[2] = {0.25, 0.75};
    for (int k = 0; k < 2; k++) {
        const xnode *bar = NULL;
        for (size_t b = 0; b < nb; b++) {
            double centre =
                xml_num(found[b], "x") + 0.5 * xml_num(found[b], "width");
            if (fabs(centre - axis_at(xs, want_e[k])) < 0.05)
                bar = found[b];
        }
        cr_assert_not_null(bar, "no bar centred on E = %g", want_e[k]);
        cr_expect(fabs(xml_num(bar, "y") - axis_at(ys, want_f[k])) < 0.02,
                  "bar at E = %g: top %g, want %g", want_e[k],
                  xml_num(bar, "y"), axis_at(ys, want_f[k]));
        cr_expect(fabs(xml_num(bar, "y") + xml_num(bar, "height") -
                       axis_at(ys, 0.0)) < 0.03);
        cr_expect(fabs(xml_num(bar, "width") - (axis_at(xs, want_e[k] + 0.5) -
                                                axis_at(xs, want_e[k] - 0.5))) <
                  0.03);
    }
    /* the model: P((2)) = (1 + P₂)/2 = 0.79 at E = 1, P((1,1)) = 0.21 at
     * E = −1 (closed form for n = 2) */
    size_t ns = xml_find(root, "line", "stick", found, 64, 0);
    cr_assert_eq(ns, 2);
    const double want_p[2] = {0.21, 0.79};
    for (int k = 0; k < 2; k++) {
        const xnode *s = found[k]; /* energies increase left to right */
        cr_expect(fabs(xml_num(s, "x1") - axis_at(xs, want_e[k])) < 0.02);
        cr_expect(fabs(xml_num(s, "y2") - axis_at(ys, want_p[k])) < 0.02,
                  "stick at E = %g reaches %g, want %g", want_e[k],
                  xml_num(s, "y2"), axis_at(ys, want_p[k]));
        cr_expect(fabs(xml_num(s, "y1") - axis_at(ys, 0.0)) < 0.02);
    }
    /* no noise: no broadened curve */
    cr_expect_eq(xml_find(root, "polyline", "model-curve", found, 64, 0), 0);
    /* the axis names the unit */
    char text[8192] = "";
    xml_text(root, text, sizeof text);
    cr_expect(strstr(text, "energy reading (Hz)") != NULL);
    xml_free(root);
    free(svg);
    svg_laws_free(laws, count);
    svg_analysis_release(&a);
}

Test(svg, readings_broadened_law_and_summary_runs) {
    /* d = 3, n = 6, noise 1.5 Hz with J = 2 Hz (noise >= half a spacing):
     * the curve is drawn; the summary run is a mean with error bars */
    svg_analysis a;
    analysis_of(NULL, result_d3, &a);
    svg_law *laws = NULL;
    size_t count = 0, total = 0;
    ss_error err;
    ss_error_clear(&err);
    cr_assert_eq(svg_laws_compute(&a, NULL, 8, &laws, &count, &total, &err),
                 SS_OK);
    page_text t;
    page_text_init(&t, 1024);
    svg_readings_write(&t, &a, laws, count, total, 0);
    char *svg = finish(&t);
    xnode *root = xml_ok(svg, "readings (inline)");
    const xnode *found[64];
    char desc[1024];
    svg_desc_text(root, desc, sizeof desc);
    cr_expect(strstr(desc, "400 shots in 1 run (summaries: mean and spread)") !=
                  NULL,
              "%s", desc);
    cr_assert_eq(xml_find(root, "polyline", "model-curve", found, 64, 0), 1);
    cr_assert_eq(xml_find(root, "circle", "summary-mean", found, 64, 0), 1);
    axis_map xs = axis_read(root, "tick-x", 0);
    /* the mean marker sits at the run's mean, 10.5 Hz */
    cr_expect(fabs(xml_num(found[0], "cx") - axis_at(xs, 10.5)) < 0.02);
    /* its standard error bar spans mean ± sqrt(20/400) */
    cr_assert_eq(xml_find(root, "line", "summary-se", found, 64, 0), 1);
    double se = sqrt(20.0 / 400.0);
    cr_expect(fabs(xml_num(found[0], "x1") - axis_at(xs, 10.5 - se)) < 0.02);
    cr_expect(fabs(xml_num(found[0], "x2") - axis_at(xs, 10.5 + se)) < 0.02);
    /* inline: no XML declaration */
    cr_expect(strncmp(svg, "<svg", 4) == 0);
    xml_free(root);
    free(svg);
    svg_laws_free(laws, count);
    svg_analysis_release(&a);
}

/* ------------------------------------------------------------------------ */
/* The predicted laws and the budget.                                         */

Test(svg, laws_group_levels_and_respect_the_budget) {
    svg_analysis a;
    analysis_of(NULL, result_d3, &a);
    svg_law *laws = NULL;
    size_t count = 0, total = 0;
    ss_error err;
    ss_error_clear(&err);
    cr_assert_eq(svg_laws_compute(&a, NULL, 8, &laws, &count, &total, &err),
                 SS_OK);
    cr_assert_eq(count, 1);
    /* six distinct contents 15, 9, 5, 3, 0, −3 (by hand), J = 2 Hz: */
    const double want[6] = {-6.0, 0.0, 6.0, 10.0, 18.0, 30.0};
    cr_assert_eq(laws[0].count, 6);
    double sum = 0.0;
    for (size_t k = 0; k < 6; k++) {
        cr_expect(fabs(laws[0].energy[k] - want[k]) < 1e-12);
        sum += laws[0].probability[k];
    }
    /* Σ_λ P_n(λ|p) = 1 (domain notes §1), to rounding */
    cr_expect(fabs(sum - 1.0) < 1e-12, "sum %.17g", sum);
    /* model mean E = J·C(6,2)·P₂ with P₂ = 0.36 + 0.09 + 0.01 = 0.46 */
    cr_expect(fabs(laws[0].mean_energy - 2.0 * 15.0 * 0.46) < 1e-12);
    svg_laws_free(laws, count);

    /* a budget of 6 diagrams (there are 7): only the candidates, said so */
    ss_budget small = {6, 1000000, 0, 0};
    cr_assert_eq(svg_laws_compute(&a, &small, 8, &laws, &count, &total, &err),
                 SS_OK);
    cr_assert_eq(laws[0].kind, SVG_LAW_CANDIDATES);
    cr_expect(strstr(laws[0].note, "budget") != NULL, "%s", laws[0].note);
    /* the candidates summed per energy: 0.2 + 0.1 at 6 Hz, 0.3 at 10 Hz */
    cr_assert_eq(laws[0].count, 2);
    cr_expect(fabs(laws[0].probability[0] - 0.3) < 1e-15);
    cr_expect(fabs(laws[0].probability[1] - 0.3) < 1e-15);
    page_text t;
    page_text_init(&t, 1024);
    svg_readings_write(&t, &a, laws, count, total, 1);
    char *svg = finish(&t);
    xnode *root = xml_ok(svg, "readings over budget");
    char text[16384] = "";
    xml_text(root, text, sizeof text);
    cr_expect(strstr(text, "only the candidates") != NULL);
    xml_free(root);
    free(svg);
    svg_laws_free(laws, count);
    svg_analysis_release(&a);
}

/* ------------------------------------------------------------------------ */
/* Figure 2: spectrum.                                                       */

Test(svg, spectrum_points_intervals_and_feasible_ranges) {
    const char *results[2] = {result_d3, result_d4};
    for (int r = 0; r < 2; r++) {
        svg_analysis a;
        analysis_of(NULL, results[r], &a);
        page_text t;
        page_text_init(&t, 1024);
        svg_spectrum_write(&t, &a, 1);
        char *svg = finish(&t);
        xnode *root = xml_ok(svg, "spectrum");
        axis_map ys = axis_read(root, "tick-y", 1);
        const xnode *found[64];
        size_t np = xml_find(root, "circle", "estimate", found, 64, 0);
        cr_assert_eq(np, a.levels);
        for (unsigned i = 0; i < a.levels; i++) {
            cr_expect(fabs(xml_num(found[i], "cy") - axis_at(ys, a.values[i])) <
                          0.02,
                      "p%u", i + 1);
            if (i > 0) /* largest first, left to right */
                cr_expect(xml_num(found[i], "cx") >
                          xml_num(found[i - 1], "cx"));
        }
        size_t ni = xml_find(root, "line", "interval", found, 64, 0);
        cr_assert_eq(ni, a.levels);
        for (unsigned i = 0; i < a.levels; i++) {
            cr_expect(fabs(xml_num(found[i], "y1") - axis_at(ys, a.lower[i])) <
                      0.02);
            cr_expect(fabs(xml_num(found[i], "y2") - axis_at(ys, a.upper[i])) <
                      0.02);
        }
        size_t nf = xml_find(root, "rect", "feasible", found, 64, 0);
        cr_expect_eq(nf, a.has_feasible ? a.levels : 0);
        for (size_t i = 0; i < nf; i++) {
            cr_expect(fabs(xml_num(found[i], "y") -
                           axis_at(ys, a.feasible_upper[i])) < 0.02);
            cr_expect(fabs(xml_num(found[i], "y") +
                           xml_num(found[i], "height") -
                           axis_at(ys, a.feasible_lower[i])) < 0.03);
        }
        cr_expect_eq(xml_find(root, "polygon", "naive", found, 64, 0),
                     a.has_naive ? a.levels : 0);
        xml_free(root);
        free(svg);
        svg_analysis_release(&a);
    }
}

/* ------------------------------------------------------------------------ */
/* Figure 3: diagrams.                                                       */

/* The boxes drawn within [x0, x0 + width) of the cell whose name is text. */
static size_t cell_boxes(const xnode *root, const char *name,
                         const xnode **boxes, size_t cap, double *cell_x) {
    const xnode *names[64];
    size_t nn = xml_find(root, "text", "diagram-name", names, 64, 0);
    const xnode *cell = NULL;
    for (size_t k = 0; k < nn; k++)
        if (names[k]->text && strcmp(names[k]->text, name) == 0)
            cell = names[k];
    cr_assert_not_null(cell, "no cell named %s", name);
    *cell_x = xml_num(cell, "x");
    const xnode *all[256];
    size_t na = xml_find(root, "rect", "box", all, 256, 0), n = 0;
    for (size_t k = 0; k < na; k++) {
        double x = xml_num(all[k], "x");
        if (x >= *cell_x - 0.01 && x < *cell_x + 110.0 && n < cap)
            boxes[n++] = all[k];
    }
    return n;
}

Test(svg, diagrams_boxes_bars_and_degenerate_group) {
    svg_analysis a;
    analysis_of(NULL, result_d3, &a);
    page_text t;
    page_text_init(&t, 1024);
    svg_diagrams_write(&t, &a, 1);
    char *svg = finish(&t);
    xnode *root = xml_ok(svg, "diagrams");
    const xnode *found[64];
    char desc[1024];
    svg_desc_text(root, desc, sizeof desc);
    cr_expect(strstr(desc, "diagrams of 1 run (") != NULL &&
                  strstr(desc, "1 group of diagrams shares an energy and is "
                               "framed together") != NULL,
              "%s", desc);
    /* 3 diagrams of 6 atoms: 18 boxes */
    cr_assert_eq(xml_find(root, "rect", "box", found, 64, 0), 18);
    struct {
        const char *name;
        unsigned rows[3];
        double p;
        double x;
    } cells[3] = {{"(4,1,1)", {4, 1, 1}, 0.2, 0},
                  {"(3,3)", {3, 3, 0}, 0.1, 0},
                  {"(4,2)", {4, 2, 0}, 0.3, 0}};
    for (int c = 0; c < 3; c++) {
        const xnode *boxes[32];
        size_t nb = cell_boxes(root, cells[c].name, boxes, 32, &cells[c].x);
        cr_assert_eq(nb, 6, "%s: %zu boxes", cells[c].name, nb);
        /* English convention: rows top to bottom hold λ₁ ≥ λ₂ ≥ … boxes,
         * all starting at the same x */
        double ys[6], x0 = 1e9, size = xml_num(boxes[0], "width");
        for (size_t k = 0; k < nb; k++) {
            ys[k] = xml_num(boxes[k], "y");
            x0 = fmin(x0, xml_num(boxes[k], "x"));
        }
        double top = ys[0];
        for (size_t k = 1; k < nb; k++)
            top = fmin(top, ys[k]);
        for (unsigned r = 0; r < 3; r++) {
            unsigned in_row = 0;
            double row_x0 = 1e9;
            for (size_t k = 0; k < nb; k++)
                if (fabs(ys[k] - (top + r * size)) < 0.02) {
                    in_row++;
                    row_x0 = fmin(row_x0, xml_num(boxes[k], "x"));
                }
            cr_expect_eq(in_row, cells[c].rows[r], "%s row %u", cells[c].name,
                         r + 1);
            if (in_row)
                cr_expect(fabs(row_x0 - x0) < 0.01,
                          "%s row %u not left-aligned", cells[c].name, r + 1);
        }
    }
    /* probability bars: p times the full length */
    size_t nb = xml_find(root, "rect", "prob-bar", found, 64, 0);
    cr_assert_eq(nb, 3);
    for (int c = 0; c < 3; c++) {
        const xnode *bar = NULL;
        for (size_t k = 0; k < nb; k++)
            if (fabs(xml_num(found[k], "x") - cells[c].x) < 0.01)
                bar = found[k];
        cr_assert_not_null(bar, "%s has no bar", cells[c].name);
        cr_expect(fabs(xml_num(bar, "width") -
                       cells[c].p * SVG_DIAGRAMS_BAR_FULL) < 0.01,
                  "%s bar %g", cells[c].name, xml_num(bar, "width"));
    }
    /* one frame holding exactly the two diagrams of content 3 */
    cr_assert_eq(xml_find(root, "rect", "degenerate-group", found, 64, 0), 1);
    double fx = xml_num(found[0], "x"), fw = xml_num(found[0], "width");
    cr_expect(cells[0].x > fx && cells[0].x + 100.0 < fx + fw);
    cr_expect(cells[1].x > fx && cells[1].x + 100.0 < fx + fw);
    cr_expect(cells[2].x > fx + fw || cells[2].x + 100.0 < fx);
    xml_free(root);
    free(svg);
    svg_analysis_release(&a);
}

Test(svg, diagrams_keep_a_group_on_one_line) {
    /* five single diagrams fill five of the six cells of a line; the group
     * of two that follows must move to the next line whole */
    static const char result[] =
        "{\"levels\":3,\"method\":\"moments\",\"flags\":[],\"runs\":["
        "{\"atoms\":6,\"shots\":50,\"mean_energy\":5,\"energy_variance\":9,"
        "\"window_sd\":3,\"candidates_in_window\":7,\"candidates\":["
        "{\"diagram\":[6],\"content\":15,\"energy\":15,\"z\":3,"
        "\"probability\":0.1},"
        "{\"diagram\":[5,1],\"content\":9,\"energy\":9,\"z\":1,"
        "\"probability\":0.1},"
        "{\"diagram\":[4,2],\"content\":5,\"energy\":5,\"z\":0,"
        "\"probability\":0.1},"
        "{\"diagram\":[3,2,1],\"content\":0,\"energy\":0,\"z\":-1,"
        "\"probability\":0.1},"
        "{\"diagram\":[2,2,2],\"content\":-3,\"energy\":-3,\"z\":-2,"
        "\"probability\":0.1},"
        "{\"diagram\":[4,1,1],\"content\":3,\"energy\":3,\"z\":-0.5,"
        "\"probability\":0.1},"
        "{\"diagram\":[3,3],\"content\":3,\"energy\":3,\"z\":-0.5,"
        "\"probability\":0.1}],"
        "\"degenerate_groups\":[[[4,1,1],[3,3]]]}],\"unit\":\"Hz\"}";
    svg_analysis a;
    analysis_of(NULL, result, &a);
    page_text t;
    page_text_init(&t, 1024);
    svg_diagrams_write(&t, &a, 1);
    char *svg = finish(&t);
    xnode *root = xml_ok(svg, "diagrams, group at a line end");
    const xnode *names[16], *frames[4];
    size_t nn = xml_find(root, "text", "diagram-name", names, 16, 0);
    cr_assert_eq(nn, 7);
    const xnode *g1 = NULL, *g2 = NULL, *first = names[0];
    for (size_t k = 0; k < nn; k++) {
        if (strcmp(names[k]->text, "(4,1,1)") == 0)
            g1 = names[k];
        if (strcmp(names[k]->text, "(3,3)") == 0)
            g2 = names[k];
    }
    cr_assert(g1 && g2);
    cr_expect(fabs(xml_num(g1, "y") - xml_num(g2, "y")) < 0.01,
              "the group is split over two lines");
    cr_expect(xml_num(g1, "y") > xml_num(first, "y"), "not on a new line");
    cr_expect(fabs(xml_num(g1, "x") - xml_num(first, "x")) < 0.01,
              "the group does not start the line");
    cr_assert_eq(xml_find(root, "rect", "degenerate-group", frames, 4, 0), 1);
    xml_free(root);
    free(svg);
    svg_analysis_release(&a);
}

/* ------------------------------------------------------------------------ */
/* Figure 4: revisions.                                                      */

Test(svg, revisions_side_by_side) {
    svg_revision revs[2];
    memset(revs, 0, sizeof revs);
    const double v[2][3] = {{0.34, 0.33, 0.33}, {0.55, 0.30, 0.15}};
    for (int k = 0; k < 2; k++) {
        revs[k].revision = (unsigned)k + 1;
        snprintf(revs[k].calibration, sizeof revs[k].calibration,
                 "box-trap-a v%d", k + 1);
        snprintf(revs[k].created_at, sizeof revs[k].created_at,
                 "2026-11-2%dT10:00:00.000Z", 5 + k);
        revs[k].levels = 3;
        revs[k].has_spectrum = 1;
        for (int i = 0; i < 3; i++) {
            revs[k].values[i] = v[k][i];
            revs[k].lower[i] = v[k][i] - 0.05;
            revs[k].upper[i] = v[k][i] + 0.05;
        }
    }
    page_text t;
    page_text_init(&t, 1024);
    svg_revisions_write(&t, revs, 2, "run01", 1);
    char *svg = finish(&t);
    xnode *root = xml_ok(svg, "revisions");
    axis_map ys = axis_read(root, "tick-y", 1);
    const xnode *found[64];
    /* one marker per revision and eigenvalue, revision 1 left of 2 */
    size_t n = xml_find(root, NULL, "estimate", found, 64, 0);
    cr_assert_eq(n, 6);
    char text[8192] = "";
    xml_text(root, text, sizeof text);
    cr_expect(strstr(text, "box-trap-a v1") && strstr(text, "box-trap-a v2"));
    /* the first two markers (eigenvalue 1): revisions 1 and 2 */
    cr_assert_str_eq(found[0]->name, "circle");
    cr_expect(fabs(xml_num(found[0], "cy") - axis_at(ys, 0.34)) < 0.02);
    cr_assert_str_eq(found[1]->name, "rect"); /* the second shape */
    cr_expect(fabs(xml_num(found[1], "y") + 0.5 * xml_num(found[1], "height") -
                   axis_at(ys, 0.55)) < 0.03);
    xml_free(root);
    free(svg);
}

/* ------------------------------------------------------------------------ */
/* Escaping and the pages.                                                   */

/* A label with every character that could break markup, a control
 * character and a byte that is not UTF-8. */
static const char hostile[] = "<&\"'> run\x01\xff</title><script>";

Test(svg, labels_are_escaped_in_figures) {
    svg_analysis a;
    analysis_of(request_d2, result_d2, &a);
    snprintf(a.label, sizeof a.label, "%s", hostile);
    page_text t;
    page_text_init(&t, 1024);
    svg_spectrum_write(&t, &a, 1);
    char *svg = finish(&t);
    xnode *root = xml_ok(svg, "spectrum with a hostile label");
    const xnode *found[4];
    cr_assert_eq(xml_find(root, "title", NULL, found, 4, 0), 1);
    /* the title reads back as the label, the two bad characters replaced
     * by U+FFFD (EF BF BD) */
    cr_expect_str_eq(found[0]->text,
                     "Estimated spectrum with intervals \xe2\x80\x94 <&\"'> "
                     "run\xef\xbf\xbd\xef\xbf\xbd</title><script>");
    cr_expect_eq(xml_find(root, "script", NULL, found, 4, 0), 0);
    xml_free(root);
    free(svg);
    svg_analysis_release(&a);
}

/* Every <svg>…</svg> of an HTML page parses on its own. */
static size_t page_svgs_ok(const char *html) {
    size_t n = 0;
    for (const char *s = strstr(html, "<svg"); s; s = strstr(s + 4, "<svg")) {
        const char *e = strstr(s, "</svg>");
        cr_assert_not_null(e);
        size_t len = (size_t)(e + 6 - s);
        char *one = strndup(s, len);
        char err[256] = "";
        xnode *x = xml_parse(one, len, err, sizeof err);
        cr_expect_not_null(x, "inline figure %zu: %s", n + 1, err);
        xml_free(x);
        free(one);
        n++;
    }
    return n;
}

Test(pages, analysis_page_escapes_and_states_the_estimate) {
    svg_analysis a;
    analysis_of(NULL, result_d3, &a);
    snprintf(a.label, sizeof a.label, "%s", hostile);
    svg_law *laws = NULL;
    size_t count = 0, total = 0;
    ss_error err;
    ss_error_clear(&err);
    cr_assert_eq(svg_laws_compute(&a, NULL, 8, &laws, &count, &total, &err),
                 SS_OK);
    svg_revision revs[2];
    memset(revs, 0, sizeof revs);
    revs[0].revision = 1;
    revs[1].revision = 2;
    snprintf(revs[0].calibration, sizeof revs[0].calibration, "%s", hostile);
    page_analysis_view v = {"an_0123456789abcdef0123",
                            "2026-11-25T11:10:00.000Z",
                            hostile,
                            "0.1.0",
                            2,
                            2,
                            "2026-11-26T02:00:00.000Z",
                            &a,
                            laws,
                            count,
                            total,
                            revs,
                            2,
                            "default-src 'none'"};
    size_t len = 0;
    char *html = page_analysis_render(&v, &len);
    cr_assert_not_null(html);
    cr_expect_eq(strlen(html), len);
    /* the raw label never appears; its escaped form does */
    cr_expect_null(strstr(html, "<&\"'>"));
    cr_expect_null(strstr(html, "<script>"));
    cr_expect_not_null(strstr(html, "&lt;&amp;&quot;&#39;&gt;"));
    /* the policy is in the head, quotes escaped in the attribute */
    cr_expect_not_null(strstr(html, "content=\"default-src &#39;none&#39;\""));
    /* the spectrum is called an estimate, with the confidence level */
    cr_expect_not_null(strstr(html, "statistical estimate"));
    cr_expect_not_null(strstr(html, "90 % confidence level"));
    /* numbers as stated: 4 decimals; a missing standard error is n/a */
    cr_expect_not_null(strstr(html, "<td class=\"num\">0.6000</td>"));
    cr_expect_not_null(strstr(html, "<td class=\"num\">n/a</td>"));
    cr_expect_not_null(strstr(html, "<td class=\"num\">0.6667</td>"));
    /* the calibration by name and version */
    cr_expect_not_null(strstr(html, "box-trap-b, version 2"));
    /* flags: the known one explained, the unknown one still listed */
    const page_flag_text *deg = page_flag_text_find("degenerate-energy");
    cr_assert_not_null(deg);
    cr_expect_not_null(strstr(html, deg->title));
    cr_expect_not_null(strstr(html, "not-a-known-flag"));
    /* four inline figures (revisions: 2), each well-formed */
    cr_expect_eq(page_svgs_ok(html), 4);
    free(html);
    svg_laws_free(laws, count);
    svg_analysis_release(&a);
}

Test(pages, list_page_escapes_and_carries_the_filter) {
    page_list_item items[1];
    memset(items, 0, sizeof items);
    snprintf(items[0].id, sizeof items[0].id, "an_00000000000000000001");
    snprintf(items[0].label, sizeof items[0].label, "%s", hostile);
    items[0].levels = 3;
    items[0].has_values = 1;
    items[0].values[0] = 0.5;
    items[0].values[1] = 0.3;
    items[0].values[2] = 0.2;
    page_list_view v = {items, 1,         "x y&z", "2026-11-23", NULL,
                        25,    "curs&or", 1,       NULL};
    char *html = page_list_render(&v, NULL);
    cr_assert_not_null(html);
    cr_expect_null(strstr(html, "<&\"'>"));
    cr_expect_not_null(strstr(html, "&lt;&amp;&quot;&#39;&gt;"));
    cr_expect_not_null(
        strstr(html, "href=\"analyses/an_00000000000000000001\""));
    /* the next page keeps the filter: percent-encoded, then '&' escaped */
    cr_expect_not_null(
        strstr(html, "href=\"./?limit=25&amp;label=x%20y%26z&amp;since="
                     "2026-11-23&amp;cursor=curs%26or\""),
        "%s", html);
    /* a bare date is offered with the browser's date input */
    cr_expect_not_null(
        strstr(html, "name=\"since\" type=\"date\" value=\"2026-11-23\""));
    cr_expect_not_null(strstr(html, "0.500, 0.300, 0.200"));
    free(html);
}

Test(pages, every_core_flag_is_explained) {
    for (int c = 0; c < SS_FLAG_COUNT; c++) {
        const char *code = ss_flag_name((ss_flag_code)c);
        const page_flag_text *f = page_flag_text_find(code);
        cr_assert_not_null(f, "no text for flag %s", code);
        cr_expect(strlen(f->meaning) > 40 && strlen(f->action) > 20, "%s",
                  code);
    }
    size_t n = 0;
    page_flag_texts(&n);
    cr_expect_eq(n, (size_t)SS_FLAG_COUNT, "texts for unknown codes");
    cr_expect_null(page_flag_text_find("no-such-flag"));
}

/* ------------------------------------------------------------------------ */
/* Small helpers.                                                            */

Test(pages, text_helpers) {
    char out[48];
    cr_expect_str_eq(page_fmt_fixed(-0.00001, 4, out), "0.0000");
    cr_expect_str_eq(page_fmt_fixed(0.12345678, 4, out), "0.1235");
    cr_expect_str_eq(page_fmt_fixed(nan(""), 4, out), "n/a");
    cr_expect_str_eq(page_fmt_coord(12.5, out), "12.5");
    cr_expect_str_eq(page_fmt_coord(40.0, out), "40");
    cr_expect_str_eq(page_fmt_coord(-0.001, out), "0");
    page_text t;
    page_text_init(&t, 8);
    page_text_escaped(&t, "a\tb\x7f\xc2\x85\xe2\x82\xac\xef\xbf\xbe");
    char *s = finish(&t);
    /* tab kept; DEL, U+0085 and U+FFFE replaced; € kept */
    cr_expect_str_eq(s, "a\tb\xef\xbf\xbd\xef\xbf\xbd\xe2\x82\xac\xef\xbf\xbd");
    free(s);
    char sub[48];
    cr_expect_str_eq(svg_subscript(12, sub), "\xe2\x82\x81\xe2\x82\x82");
}

Test(pages, nice_ticks) {
    /* 1-2-5 steps (the common "nice numbers" rule of thumb) */
    double ticks[16], step;
    size_t n = svg_ticks(0.0, 1.0, 5, ticks, 16, &step);
    cr_assert_eq(n, 6);
    cr_expect(fabs(step - 0.2) < 1e-15);
    for (size_t k = 0; k < n; k++)
        cr_expect(fabs(ticks[k] - 0.2 * (double)k) < 1e-12);
    n = svg_ticks(-7.3, 18.1, 5, ticks, 16, &step);
    cr_expect(fabs(step - 5.0) < 1e-15);
    cr_expect(fabs(ticks[0] + 5.0) < 1e-12 &&
              fabs(ticks[n - 1] - 15.0) < 1e-12);
    cr_expect(fabs(svg_nice_top(0.853, 5) - 1.0) < 1e-12);
    char lab[48];
    cr_expect_str_eq(svg_tick_label(0.4, 0.2, lab), "0.4");
    cr_expect_str_eq(svg_tick_label(-40.0, 20.0, lab), "-40");
}

Test(pages, favicon_is_an_ico) {
    size_t len = 0;
    unsigned char *ico = page_favicon_ico(&len);
    cr_assert_not_null(ico);
    /* ICONDIR: reserved 0, type 1 (icon), one image; entry: 16x16, 32 bpp,
     * data size and offset (the ICO layout [from memory]) */
    cr_expect_eq(len, 6u + 16u + 40u + 1024u + 64u);
    cr_expect(ico[0] == 0 && ico[1] == 0 && ico[2] == 1 && ico[4] == 1);
    cr_expect(ico[6] == 16 && ico[7] == 16 && ico[12] == 32);
    unsigned size = ico[14] | (unsigned)ico[15] << 8;
    unsigned off = ico[18] | (unsigned)ico[19] << 8;
    cr_expect_eq(size, 40u + 1024u + 64u);
    cr_expect_eq(off, 22u);
    cr_expect_eq(off + size, len);
    cr_expect_eq(ico[22], 40); /* BITMAPINFOHEADER size */
    free(ico);
}

/* Every figure stays well-formed on awkward input: no spectrum, no runs,
 * no calibration echo. */
Test(svg, figures_well_formed_on_sparse_results) {
    static const char *const results[] = {
        "{\"levels\":3,\"method\":\"diagrams\",\"confidence\":0.95,"
        "\"flags\":[],\"runs\":[{\"atoms\":6,\"shots\":10,\"mean_energy\":3,"
        "\"energy_variance\":1,\"window_sd\":1,\"candidates_in_window\":1,"
        "\"candidates\":[{\"diagram\":[4,1,1],\"content\":3,\"energy\":3,"
        "\"z\":0,\"probability\":null,\"spectrum_estimate\":[0.6,0.2,0.2]}],"
        "\"degenerate_groups\":[]}],\"unit\":\"\"}",
        "{\"levels\":2,\"method\":\"moments\",\"flags\":[],\"runs\":[]}",
        result_d4,
    };
    for (size_t r = 0; r < sizeof results / sizeof results[0]; r++) {
        svg_analysis a;
        analysis_of(NULL, results[r], &a);
        svg_law *laws = NULL;
        size_t count = 0, total = 0;
        ss_error err;
        ss_error_clear(&err);
        cr_assert_eq(svg_laws_compute(&a, NULL, 8, &laws, &count, &total, &err),
                     SS_OK);
        for (int f = 0; f < 3; f++) {
            page_text t;
            page_text_init(&t, 256);
            if (f == 0)
                svg_readings_write(&t, &a, laws, count, total, 1);
            else if (f == 1)
                svg_spectrum_write(&t, &a, 1);
            else
                svg_diagrams_write(&t, &a, 1);
            char *svg = finish(&t);
            xnode *root = xml_ok(svg, "sparse figure");
            const xnode *found[2];
            cr_expect_eq(xml_find(root, "title", NULL, found, 2, 0), 1);
            xml_free(root);
            free(svg);
        }
        svg_laws_free(laws, count);
        svg_analysis_release(&a);
    }
}
