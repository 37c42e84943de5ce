/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* Build-time generator of the LV2 plugin description (outstage.ttl) from the
 * port table in dsp/os_ports.c, so the TTL can never drift from the code.
 * Every stage that os_stage_available() reports is written; nothing here names
 * a stage or a port.
 *
 * Usage: ttlgen OUTPUT.ttl VERSION   (VERSION as "major.minor.micro")
 *
 * Vocabulary: LV2 core (http://lv2plug.in/ns/lv2core), LV2 units
 * (http://lv2plug.in/ns/extensions/units), LV2 port properties
 * (http://lv2plug.in/ns/ext/port-props). */

#include "os_ports.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* A unit of the port table as LV2 sees it: a standard instance from the units
 * extension (curie set), or one declared in outstage.ttl (local name set). */
typedef struct {
    const char *table; /* unit string in the port table */
    const char *curie; /* standard units: instance, or NULL */
    const char *local; /* custom unit: local name under the osu: prefix */
    const char *label; /* custom unit: rdfs:label */
    const char *symbol;
    const char *render;
} UnitMap;

/* Standard instances are those of units.ttl in LV2 1.18; the rest have none
 * there and are declared as units:Unit of our own. */
static const UnitMap unit_map[] = {
    {"dB", "units:db", NULL, NULL, NULL, NULL},
    {"%", "units:pc", NULL, NULL, NULL, NULL},
    {"Hz", "units:hz", NULL, NULL, NULL, NULL},
    {"kHz", "units:khz", NULL, NULL, NULL, NULL},
    {"MHz", "units:mhz", NULL, NULL, NULL, NULL},
    {"frames", "units:frame", NULL, NULL, NULL, NULL},
    {"s", "units:s", NULL, NULL, NULL, NULL},
    {"ms", "units:ms", NULL, NULL, NULL, NULL},
    {"V", NULL, "volt", "volts", "V", "%f V"},
    {"mA", NULL, "milliampere", "milliamperes", "mA", "%f mA"},
    {"mH", NULL, "millihenry", "millihenries", "mH", "%f mH"},
    {"A", NULL, "ampere", "amperes", "A", "%f A"},
    {"W", NULL, "watt", "watts", "W", "%f W"},
    {"ohm", NULL, "ohm", "ohms", "\xce\xa9", "%f \xce\xa9"},
    {"V/us", NULL, "volt_per_microsecond", "volts per microsecond", "V/\xc2\xb5s",
     "%f V/\xc2\xb5s"},
    {"x", NULL, "times", "times (factor)", "\xc3\x97", "%f\xc3\x97"},
};

#define N_UNITS (sizeof(unit_map) / sizeof(unit_map[0]))

static const UnitMap *find_unit(const char *table)
{
    for (size_t i = 0; i < N_UNITS; ++i) {
        if (strcmp(unit_map[i].table, table) == 0) {
            return &unit_map[i];
        }
    }
    return NULL;
}

/* Turtle string body: escape what a STRING_LITERAL_QUOTE may not hold. */
static void put_string(FILE *f, const char *s)
{
    fputc('"', f);
    for (; *s; ++s) {
        switch (*s) {
        case '"':
            fputs("\\\"", f);
            break;
        case '\\':
            fputs("\\\\", f);
            break;
        case '\n':
            fputs("\\n", f);
            break;
        default:
            fputc(*s, f);
        }
    }
    fputc('"', f);
}

/* The shortest decimal (at least one fractional digit, so Turtle reads an
 * xsd:decimal) that reads back as the same float. */
static void put_number(FILE *f, float v)
{
    char buf[64];
    for (int d = 1; d <= 12; ++d) {
        snprintf(buf, sizeof(buf), "%.*f", d, (double)v);
        if (strtof(buf, NULL) == v) {
            break;
        }
    }
    fputs(buf, f);
}

static int check_port(OsStageKind kind, uint32_t i, const OsPortInfo *p)
{
    if (p->unit[0] != '\0' && find_unit(p->unit) == NULL) {
        fprintf(stderr, "ttlgen: stage %d port %u (%s): unknown unit \"%s\"; add it to unit_map\n",
                (int)kind, i, p->symbol, p->unit);
        return -1;
    }
    if ((p->type == OS_PORT_CONTROL_IN || p->type == OS_PORT_CONTROL_OUT) &&
        !(p->min <= p->def && p->def <= p->max)) {
        fprintf(stderr, "ttlgen: port %s: default outside its range\n", p->symbol);
        return -1;
    }
    return 0;
}

static void put_port(FILE *f, uint32_t index, const OsPortInfo *p, int last)
{
    static const char *const classes[] = {
        "lv2:AudioPort , lv2:InputPort", "lv2:AudioPort , lv2:OutputPort",
        "lv2:ControlPort , lv2:InputPort", "lv2:ControlPort , lv2:OutputPort"};
    const int control = p->type == OS_PORT_CONTROL_IN || p->type == OS_PORT_CONTROL_OUT;

    fprintf(f, "\t\ta %s ;\n\t\tlv2:index %u ;\n\t\tlv2:symbol ", classes[p->type], index);
    put_string(f, p->symbol);
    fputs(" ;\n\t\tlv2:name ", f);
    put_string(f, p->name);
    fputs(" ;\n\t\trdfs:comment ", f);
    put_string(f, p->comment);
    fputs(" ;\n", f);

    if (control) {
        if (p->type == OS_PORT_CONTROL_IN) {
            fputs("\t\tlv2:default ", f);
            put_number(f, p->def);
            fputs(" ;\n", f);
        }
        fputs("\t\tlv2:minimum ", f);
        put_number(f, p->min);
        fputs(" ;\n\t\tlv2:maximum ", f);
        put_number(f, p->max);
        fputs(" ;\n", f);
    }

    if (p->unit[0] != '\0') {
        const UnitMap *u = find_unit(p->unit);
        if (u->curie) {
            fprintf(f, "\t\tunits:unit %s ;\n", u->curie);
        } else {
            fprintf(f, "\t\tunits:unit osu:%s ;\n", u->local);
        }
    }

    const char *props[6];
    int np = 0;
    if (p->flags & OS_PF_TOGGLE) {
        props[np++] = "lv2:toggled";
    }
    if (p->flags & OS_PF_INTEGER) {
        props[np++] = "lv2:integer";
    }
    if (p->flags & OS_PF_ENUMERATION) {
        props[np++] = "lv2:enumeration";
    }
    if (p->flags & OS_PF_LOGARITHMIC) {
        props[np++] = "pprop:logarithmic";
    }
    if (p->flags & OS_PF_LATENCY) {
        props[np++] = "lv2:reportsLatency";
    }
    if (np > 0) {
        fputs("\t\tlv2:portProperty ", f);
        for (int k = 0; k < np; ++k) {
            fprintf(f, "%s%s", k ? " , " : "", props[k]);
        }
        fputs(" ;\n", f);
    }

    if (p->flags & OS_PF_ENABLE) {
        fputs("\t\tlv2:designation lv2:enabled ;\n", f);
    }
    if (p->flags & OS_PF_LATENCY) {
        fputs("\t\tlv2:designation lv2:latency ;\n", f);
    }

    if (p->points) {
        fputs("\t\tlv2:scalePoint ", f);
        for (const OsScalePoint *sp = p->points; sp->label; ++sp) {
            fprintf(f, "%s[\n\t\t\trdfs:label ", sp == p->points ? "" : " , ");
            put_string(f, sp->label);
            fputs(" ;\n\t\t\trdf:value ", f);
            put_number(f, sp->value);
            fputs("\n\t\t]", f);
        }
        fputs(" ;\n", f);
    }

    /* Turtle allows the trailing " ;" before "]" (predicateObjectList). */
    fputs(last ? "\t] .\n" : "\t] , [\n", f);
}

static int put_stage(FILE *f, OsStageKind kind, int minor, int micro)
{
    const OsStageInfo *info = os_stage_info(kind);
    const uint32_t n = os_port_count(kind);
    if (info == NULL || n == 0) {
        fprintf(stderr, "ttlgen: stage %d has no identity or ports\n", (int)kind);
        return -1;
    }
    for (uint32_t i = 0; i < n; ++i) {
        if (check_port(kind, i, os_port_get(kind, i)) != 0) {
            return -1;
        }
    }

    fprintf(f, "<%s>\n\ta lv2:Plugin , lv2:SimulatorPlugin ;\n\tdoap:name ", info->uri);
    put_string(f, info->name);
    fputs(" ;\n\tdoap:license <http://opensource.org/licenses/isc> ;\n", f);
    fprintf(f, "\tlv2:minorVersion %d ;\n\tlv2:microVersion %d ;\n", minor, micro);
    fputs("\tlv2:optionalFeature lv2:hardRTCapable ;\n\trdfs:comment ", f);
    put_string(f, info->comment);
    fputs(" ;\n\tlv2:port [\n", f);
    for (uint32_t i = 0; i < n; ++i) {
        put_port(f, i, os_port_get(kind, i), i + 1 == n);
    }
    fputs("\n", f);
    return 0;
}

/* Custom units used by any emitted port, each declared once. */
static void put_units(FILE *f)
{
    for (size_t u = 0; u < N_UNITS; ++u) {
        const UnitMap *m = &unit_map[u];
        int used = 0;
        for (int k = 0; k < OS_STAGE_COUNT && !used && m->local; ++k) {
            if (!os_stage_available((OsStageKind)k)) {
                continue;
            }
            for (uint32_t i = 0; i < os_port_count((OsStageKind)k); ++i) {
                if (strcmp(os_port_get((OsStageKind)k, i)->unit, m->table) == 0) {
                    used = 1;
                    break;
                }
            }
        }
        if (!used) {
            continue;
        }
        fprintf(f, "osu:%s\n\ta units:Unit ;\n\trdfs:label ", m->local);
        put_string(f, m->label);
        fputs(" ;\n\tunits:symbol ", f);
        put_string(f, m->symbol);
        fputs(" ;\n\tunits:render ", f);
        put_string(f, m->render);
        fputs(" .\n\n", f);
    }
}

int main(int argc, char **argv)
{
    int major = 0, minor = 0, micro = 0;
    if (argc != 3 || sscanf(argv[2], "%d.%d.%d", &major, &minor, &micro) != 3) {
        fprintf(stderr, "usage: ttlgen OUTPUT.ttl MAJOR.MINOR.MICRO\n");
        return 2;
    }
    (void)major;

    FILE *f = fopen(argv[1], "w");
    if (f == NULL) {
        perror(argv[1]);
        return 1;
    }
    fputs("# Generated by tools/ttlgen from dsp/os_ports.c; do not edit.\n"
          "# Copyright 2026 outstage developers\n"
          "# SPDX-License-Identifier: ISC\n\n"
          "@prefix doap: <http://usefulinc.com/ns/doap#> .\n"
          "@prefix lv2: <http://lv2plug.in/ns/lv2core#> .\n"
          "@prefix pprop: <http://lv2plug.in/ns/ext/port-props#> .\n"
          "@prefix rdf: <http://www.w3.org/1999/02/22-rdf-syntax-ns#> .\n"
          "@prefix rdfs: <http://www.w3.org/2000/01/rdf-schema#> .\n"
          "@prefix units: <http://lv2plug.in/ns/extensions/units#> .\n"
          "@prefix osu: <urn:outstage:units:> .\n\n",
          f);

    int status = 0;
    int emitted = 0;
    for (int k = 0; k < OS_STAGE_COUNT && status == 0; ++k) {
        if (os_stage_available((OsStageKind)k)) {
            status = put_stage(f, (OsStageKind)k, minor, micro);
            ++emitted;
        }
    }
    if (status == 0) {
        put_units(f);
    }
    if (emitted == 0) {
        fprintf(stderr, "ttlgen: no stage is available\n");
        status = -1;
    }
    if (fclose(f) != 0) {
        perror(argv[1]);
        status = -1;
    }
    if (status != 0) {
        remove(argv[1]);
        return 1;
    }
    return 0;
}
