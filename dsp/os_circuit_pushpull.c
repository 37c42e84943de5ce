/* Copyright 2026 outstage developers */
/* SPDX-License-Identifier: ISC */

/* The push-pull stage's circuit. The op-amp of os_opamp.h drives, from its
 * output pin vo, the joined bases of a complementary emitter-follower pair
 * (os_follower.h) into the load. The feedback divider R1 + R2 =
 * OS_FEEDBACK_TOTAL (gain G = 1 + R2/R1) hangs on the op-amp pin (loop = 0)
 * or on the output (loop = 1).
 *
 * The one state is the op-amp's internal node x. The pin sits Rs io below it,
 *   x = X(vo) = vo + Rs io(vo),   io(vo) = ib(vo) (+ vo / (R1 + R2), loop 0),
 * with ib the base current the pair draws, so given vo everything is explicit
 * but the follower network, which the map of os_follower.h gives. Each TR-BDF2
 * sub-step needs x = c + w f(x, vd, io) with vd = vin - v_fb / G, v_fb = vo
 * (loop 0) or out (loop 1); written in vo,
 *   R(vo) = X(vo) - c - w f(X(vo), vin - v_fb(vo) / G, io(vo)) = 0,
 * and R rises strictly with vo: X, io, v_fb and out all rise with vo
 * (os_follower.h), and every term of f falls with x, v_fb and io. So the
 * safeguarded scalar Newton iteration of os_solver.h converges from any guess,
 * with one map evaluation and one op-amp rate per residual: there is no inner
 * iteration that could fail or leave the network inconsistent with the state.
 *
 * The map depends on the pair's component values, the rail and the load.
 * When one of them jumps (or the stage resets) the map is built again at
 * once, refining its grid wherever the interpolation needs it. While they
 * glide, a second map is solved again on the first one's grid, a few nodes
 * per frame, at most every MAP_INTERVAL, and the network crossfades from the
 * first map to the second over MAP_INTERVAL / 2: a control swept
 * continuously costs a bounded share of the time and the network follows it
 * without steps (zipper noise). Once the controls rest, a refined map is built
 * the same way and crossfaded in.
 *
 * Into a loudspeaker (os_load.h) the output node carries, within a TR-BDF2
 * sub-step, the load's Norton equivalent G out + J, with J set by the load's
 * states: the network is no longer a function of vo alone, so no map serves
 * it, and each residual solves the network at vo directly (os_follower_solve(),
 * warm-started from the last solution), with conductance G (+ the divider's,
 * loop 1) and current J. R still rises with slope at least 1 in vo (X does,
 * and f falls), which bounds the bracket from the first evaluation. The load
 * voltage's slopes, which the window needs, come from the quadratic through
 * the step's three load voltages (start, inner point, end); the load's
 * states follow from the output node once a sub-step is solved. */

#include "os_circuit.h"

#include "os_follower.h"
#include "os_load.h"
#include "os_opamp.h"
#include "os_solver.h"

#include <math.h>
#include <string.h>

#define NEWTON_TOL 1e-7 /* V, on vo */
#define NEWTON_ITER 60
/* The map covers the rails and this much beyond, V (the op-amp's swing stops
 * short of them). */
#define MAP_MARGIN 1.0
/* While controls glide: a new map at most this often (s), this many nodes
 * solved per frame (a refit of 400 nodes takes 50 frames, about 1 ms). */
#define MAP_INTERVAL 0.01
#define MAP_NODES_PER_FRAME 8

/* The signal state: the op-amp's internal node x (V), its rate (V/s), the
 * pin voltage vo there (V) and the input (V); dvo, the pin's rate (V/s), only
 * guesses the next step's solution. */
typedef struct {
    double x, fx, vo, vin, dvo;
    /* into a loudspeaker: its states, the load voltage at the step's end and
     * the network's last solution (the next solve's warm start) */
    OsLoadState ls;
    double vl;
    OsFollowerPoint pt;
} State;

typedef struct {
    OsOpampCoeffs op;
    OsFollower net; /* the component values the map was built for */
    double inv_g;
    double g_load;  /* 1 / R_load */
    double gfb_pin; /* divider conductance on the op-amp pin (loop 0), else 0 */
    int loop;       /* 1: feedback from the load */
    double h;       /* step, s */
    double w;       /* TR-BDF2 weight of the step being taken, s */
    State st;
    /* the last evaluation, for the step's report */
    double limit; /* op-amp limiter share */
    /* the maps: map[cur] in use; while blend > 0 the network is
     * (1 - blend) map[cur] + blend map[!cur]; a build fills map[!cur] */
    OsFollowerMap map[2];
    int cur;
    int built;    /* map[cur] exists */
    int refined;  /* map[cur] has a refined grid of its own */
    int building; /* a build of map[!cur] is running */
    double blend, blend_step;
    OsFollower want; /* the network the controls ask for now */
    double want_vmax;
    int frames;   /* frames since the last build started */
    int interval; /* MAP_INTERVAL in frames */
    int quiet;    /* frames since the controls last moved */
    OsFollowerBuild job;
    OsLoad load;
    double gfb_out; /* divider conductance on the output node (loop 1), else 0 */
} OsPushpullCircuit;

static int same_net(const OsFollower *a, const OsFollower *b)
{
    return a->npn.is == b->npn.is && a->npn.inv_bf == b->npn.inv_bf && a->pnp.is == b->pnp.is &&
           a->pnp.inv_bf == b->pnp.inv_bf && a->half_bias == b->half_bias && a->re == b->re &&
           a->rail == b->rail && a->gl == b->gl;
}

/* Whether map m is for network f over |vo| <= vmax. */
static int map_is(const OsFollowerMap *m, const OsFollower *f, double vmax)
{
    return same_net(&m->net, f) && m->vmax == vmax;
}

static void update(void *c, const double *si, double h, OsUpdate how)
{
    OsPushpullCircuit *s = c;
    os_opamp_coeffs_from(si, &s->op);
    const double g_fb = 1.0 / OS_FEEDBACK_TOTAL;
    s->inv_g = 1.0 / si[OS_P_GAIN];
    s->g_load = 1.0 / si[OS_P_LOAD];
    s->loop = si[OS_P_LOOP] >= 0.5;
    s->gfb_pin = s->loop ? 0.0 : g_fb;
    s->h = h;
    s->w = os_trbdf2_weight(h);
    s->interval = (int)ceil(MAP_INTERVAL / (h * si[OS_P_OVERSAMPLE]));
    os_follower_setup(&s->want, si[OS_P_VBE], si[OS_P_BETA], si[OS_P_BIAS], si[OS_P_EMITTER_R],
                      si[OS_P_RAIL], s->g_load + (s->loop ? g_fb : 0.0));
    s->want_vmax = si[OS_P_RAIL] + MAP_MARGIN;
    s->gfb_out = s->loop ? g_fb : 0.0;
    os_load_setup(&s->load, si, s->w);
    if (s->load.speaker) {
        /* no map: the network is solved where it is needed (the header);
         * one is built at once when the resistor comes back */
        s->built = s->refined = s->building = 0;
        s->blend = 0.0;
        return;
    }
    if (how != OS_UPDATE_RAMP || !s->built) {
        /* now: a refined map, no blend */
        if (!s->built || !s->refined || !map_is(&s->map[s->cur], &s->want, s->want_vmax)) {
            os_follower_map_build(&s->map[s->cur], &s->job, &s->want, s->want_vmax);
        }
        s->built = s->refined = 1;
        s->building = 0;
        s->blend = 0.0;
        s->quiet = 0;
    } else if (!map_is(&s->map[s->cur], &s->want, s->want_vmax)) {
        s->quiet = 0;
    }
}

/* Once per frame: the builds and blends of update()'s comment. */
static void frame(void *c)
{
    OsPushpullCircuit *s = c;
    if (s->load.speaker) {
        return;
    }
    ++s->frames;
    ++s->quiet;
    OsFollowerMap *next = &s->map[!s->cur];
    if (s->blend > 0.0) {
        s->blend += s->blend_step;
        if (s->blend >= 1.0) {
            s->cur = !s->cur;
            s->blend = 0.0;
        }
        return;
    }
    if (s->building) {
        if (os_follower_build_run(&s->job, next, MAP_NODES_PER_FRAME)) {
            s->building = 0;
            const int frames = s->interval / 2 > 1 ? s->interval / 2 : 1;
            s->blend_step = 1.0 / frames;
            s->blend = s->blend_step;
            s->refined = s->job.grid == NULL;
        }
        return;
    }
    const int moved = !map_is(&s->map[s->cur], &s->want, s->want_vmax);
    if (moved && s->frames >= s->interval) {
        /* gliding: solve the present grid again for the new values */
        os_follower_build_start(&s->job, next, &s->want, s->want_vmax, &s->map[s->cur]);
        s->building = 1;
        s->frames = 0;
    } else if (!moved && !s->refined && s->quiet >= s->interval) {
        /* at rest: a grid refined for the values reached */
        os_follower_build_start(&s->job, next, &s->want, s->want_vmax, NULL);
        s->building = 1;
        s->frames = 0;
    }
}

static void set_step(void *c, double h)
{
    OsPushpullCircuit *s = c;
    s->h = h;
    s->w = os_trbdf2_weight(h);
    os_load_set_weight(&s->load, s->w);
}

static void reset(void *c)
{
    OsPushpullCircuit *s = c;
    memset(&s->st, 0, sizeof(s->st));
    s->limit = 0.0;
}

static int ok(const void *c)
{
    const OsPushpullCircuit *s = c;
    int fine = isfinite(s->st.x) && isfinite(s->st.fx) && isfinite(s->st.vo) &&
               isfinite(s->st.vin) && isfinite(s->st.dvo) && isfinite(s->st.vl) &&
               isfinite(s->st.pt.vbe) && isfinite(s->st.pt.veb);
    for (int i = 0; i < 3; ++i) {
        fine = fine && isfinite(s->st.ls.y[i]) && isfinite(s->st.ls.my[i]);
    }
    return fine;
}

static void save(const void *c, void *state)
{
    memcpy(state, &((const OsPushpullCircuit *)c)->st, sizeof(State));
}

static void restore(void *c, const void *state)
{
    memcpy(&((OsPushpullCircuit *)c)->st, state, sizeof(State));
}

/* The loop at pin voltage vo and input vin: x, the op-amp's rate and its
 * derivative by vo through the network. */
typedef struct {
    double x, dx;     /* X(vo) and dX/dvo */
    double out, dout; /* the output node and d(out)/dvo */
    double f, df;     /* dx/dt and its derivative by vo, 1/s */
    double limit;
    double vd; /* the op-amp's differential input, V */
    /* the op-amp rate's partial derivatives (by x, vd, io), for the loop
     * derivative at another coupling (step_speaker()) */
    double f_x, f_vd, f_io;
} Loop;

/* The network at vo: the map in use, or the blend of two. */
static void network_at(const OsPushpullCircuit *s, double vo, double *out, double *dout, double *ib,
                       double *dib)
{
    os_follower_map_eval(&s->map[s->cur], vo, out, dout, ib, dib);
    if (s->blend > 0.0) {
        double o2, do2, i2, di2;
        os_follower_map_eval(&s->map[!s->cur], vo, &o2, &do2, &i2, &di2);
        const double b = s->blend;
        *out += b * (o2 - *out);
        *dout += b * (do2 - *dout);
        *ib += b * (i2 - *ib);
        *dib += b * (di2 - *dib);
    }
}

/* The loop at vo given the network's base current ib and its slope dib
 * (l->out and l->dout already set). */
static void loop_from(const OsPushpullCircuit *s, double vo, double vin, double ib, double dib,
                      Loop *l)
{
    const double io = ib + s->gfb_pin * vo, dio = dib + s->gfb_pin;
    l->x = vo + s->op.rs * io;
    l->dx = 1.0 + s->op.rs * dio;
    const double vfb = s->loop ? l->out : vo, dvfb = s->loop ? l->dout : 1.0;
    OsOpampRate r;
    l->vd = vin - vfb * s->inv_g;
    os_opamp_rate(&s->op, l->x, l->vd, io, &r);
    l->f = r.f;
    l->df = r.df_dx * l->dx - r.df_dvd * s->inv_g * dvfb + r.df_dio * dio;
    l->f_x = r.df_dx;
    l->f_vd = r.df_dvd;
    l->f_io = r.df_dio;
    l->limit = r.limit;
}

static void loop_at(const OsPushpullCircuit *s, double vo, double vin, Loop *l)
{
    double ib, dib;
    network_at(s, vo, &l->out, &l->dout, &ib, &dib);
    loop_from(s, vo, vin, ib, dib, l);
}

typedef struct {
    const OsPushpullCircuit *s;
    double c, vin;
    double at; /* the pin voltage l was last evaluated at */
    Loop l;
} Substep;

static double residual(void *ctx, double vo, double *d)
{
    Substep *q = ctx;
    q->at = vo;
    loop_at(q->s, vo, q->vin, &q->l);
    *d = q->l.dx - q->s->w * q->l.df;
    return q->l.x - q->c - q->s->w * q->l.f;
}

/* Solve one TR-BDF2 sub-step x = c + w f for the pin voltage, from @p guess;
 * *l ends as the loop at the solution. */
static double solve_substep(OsPushpullCircuit *s, double c, double vin, double guess, Loop *l,
                            int *evals)
{
    /* Bracket. As in the op-amp stage, |x - c| <= w SR beyond the clamps' pull,
     * and x stays within the swing clamp's reach; vo lies between 0 and x
     * (the pair draws current of the sign of vo), with room for rounding. */
    const OsOpampCoeffs *op = &s->op;
    const double reach = 1.01 * s->w * op->sr + 1e-6;
    const double xc = op->vsw + 1.0986122886681098 / op->inv_w;
    const double xlo = fmax(fmin(c, 0.0) - reach, fmin(c, -xc));
    const double xhi = fmin(fmax(c, 0.0) + reach, fmax(c, xc));
    const double lo = fmin(xlo, 0.0) - 0.1, hi = fmax(xhi, 0.0) + 0.1;
    Substep q = {s, c, vin, (double)NAN, {0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0}};
    int it = 0;
    const double vo = os_newton_scalar(residual, &q, guess, lo, hi, NEWTON_TOL, NEWTON_ITER, &it);
    *evals += it;
    const double dv = vo - q.at;
    if (fabs(dv) <= NEWTON_TOL) {
        /* the last evaluation is within the tolerance of the solution: carry
         * it there to first order (the error is of order dv^2, below 1e-14 V)
         * instead of evaluating the loop once more */
        *l = q.l;
        l->x += l->dx * dv;
        l->out += l->dout * dv;
        l->f += l->df * dv;
    } else {
        *evals += 1;
        loop_at(s, vo, vin, l);
    }
    return vo;
}

/* A sub-step into a loudspeaker: the network with the load's Norton
 * equivalent, solved at each vo (the header). */
typedef struct {
    const OsPushpullCircuit *s;
    OsFollower net; /* the pair with the sub-step's conductance and current */
    double c, vin;
    double at;          /* where l was last evaluated */
    OsFollowerPoint pt; /* the network there: the next solve's warm start */
    Loop l;
} SpeakerSub;

/* The network is solved within the map's domain, |vo| <= rail + MAP_MARGIN,
 * and continued along its tangent beyond, as the map is (os_follower.h):
 * far beyond the rails a collector junction is forward-biased by volts and
 * Ebers-Moll's currents there (continued linearly above OS_BJT_EXP_MAX) are
 * astronomically large, which no state of the circuit reaches but a Newton
 * iterate may visit. */
static void loop_direct(SpeakerSub *q, double vo, Loop *l)
{
    const double vmax = q->s->want_vmax;
    const double at = vo > vmax ? vmax : vo < -vmax ? -vmax : vo;
    OsFollowerPoint p;
    os_follower_solve(&q->net, at, &q->pt, &p);
    q->pt = p;
    const double ext = vo - at;
    if (ext == 0.0) {
        l->out = p.out;
        l->dout = p.dout;
        loop_from(q->s, vo, q->vin, p.ib, p.dib, l);
        return;
    }
    /* beyond: along the tangent, its slopes held to what a follower can
     * have (out follows vo with a gain between 0 and 1; the base current
     * rises with vo, here at most 1 A/V), since at the domain's end a
     * transistor may be saturated so deeply (absurd bias) that its slopes
     * are astronomical */
    const double dout = p.dout < 0.0 ? 0.0 : p.dout > 1.0 ? 1.0 : p.dout;
    const double dib = p.dib < 0.0 ? 0.0 : p.dib > 1.0 ? 1.0 : p.dib;
    l->out = p.out + dout * ext;
    l->dout = dout;
    loop_from(q->s, vo, q->vin, p.ib + dib * ext, dib, l);
}

static double residual_direct(void *ctx, double vo, double *d)
{
    SpeakerSub *q = ctx;
    q->at = vo;
    loop_direct(q, vo, &q->l);
    *d = q->l.dx - q->s->w * q->l.df;
    return q->l.x - q->c - q->s->w * q->l.f;
}

/* Solve one sub-step into the loudspeaker whose Norton current is @p j, from
 * @p guess and the network solution *pt (updated); *l ends as the loop at the
 * solution. */
static double solve_speaker(OsPushpullCircuit *s, double c, double vin, double j, double guess,
                            OsFollowerPoint *pt, Loop *l, int *evals)
{
    SpeakerSub q;
    q.s = s;
    q.net = s->want;
    q.net.gl = s->load.g + s->gfb_out;
    q.net.j = j;
    q.c = c;
    q.vin = vin;
    q.at = (double)NAN;
    q.pt = *pt;
    /* Bracket: x within the swing clamp's reach or w SR of c, as in
     * solve_substep(); the pin, whose current the coil may reverse, within
     * the sense resistor's drop at 1.2 Ilim (the limiter's knee) of that;
     * the slope rule tightens it from the first evaluation. A root beyond it
     * (only after settings far outside physical sense) leaves the pin at its
     * end: bounded. */
    const OsOpampCoeffs *op = &s->op;
    const double reach = 1.01 * s->w * op->sr + 1e-6;
    const double xc = op->vsw + 1.0986122886681098 / op->inv_w;
    const double xlo = fmax(fmin(c, 0.0) - reach, fmin(c, -xc));
    const double xhi = fmin(fmax(c, 0.0) + reach, fmax(c, xc));
    const double drop = 1.2 * OS_VSENSE + 0.1;
    const double lo = fmin(xlo, 0.0) - drop, hi = fmax(xhi, 0.0) + drop;
    if (!(fabs(q.pt.vbe) < 3.0 && fabs(q.pt.veb) < 3.0)) {
        /* a warm start from far outside the junctions' range: from rest */
        q.pt.vbe = q.pt.veb = q.net.half_bias;
        q.pt.dvbe = q.pt.dveb = 0.0;
        q.pt.vo = 0.0;
        q.pt.out = 0.0;
    }
    int it = 0;
    const double start = isfinite(guess) ? guess : 0.0;
    const double vo =
        os_newton_scalar_unit(residual_direct, &q, start, lo, hi, NEWTON_TOL, NEWTON_ITER, &it);
    *evals += it;
    if (fabs(vo - q.at) <= NEWTON_TOL) {
        const double dv = vo - q.at;
        *l = q.l;
        l->x += l->dx * dv;
        l->out += l->dout * dv;
        l->f += l->df * dv;
    } else {
        *evals += 1;
        loop_direct(&q, vo, l);
    }
    *pt = q.pt;
    return vo;
}

/* The slope at @p t of the quadratic through (0, a), (tg, b), (h, e): the
 * load voltage's rate for the window. The network's own slopes at the load's
 * instantaneous conductance were tried instead: they are exact where the
 * voltage is smooth, but where the voice coil's current commutates from one
 * transistor to the other within a step (class B) they are up to 30 times
 * the step's mean slope, the window's cubic overshoots, and the error against
 * ngspice on program material rose from 0.39 to 0.49 % at 4x and from 0.8 to
 * 7 % at 2x. */
static double quad_slope(double a, double b, double e, double tg, double h, double t)
{
    return a * (2.0 * t - tg - h) / (tg * h) + b * (2.0 * t - h) / (tg * (tg - h)) +
           e * (2.0 * t - tg) / (h * (h - tg));
}

static void step_speaker(OsPushpullCircuit *s, double vin, double vin_g, OsStepResult *r)
{
    const double g = OS_TRBDF2_G;
    int evals = 0;
    State *st = &s->st;
    double mc[3];
    OsLoadState lsg, ls1;
    Loop lg, l1;
    OsFollowerPoint pt = st->pt;
    os_load_c_trap(&s->load, &st->ls, mc);
    const double c1 = st->x + s->w * st->fx;
    const double vog = solve_speaker(s, c1, vin_g, os_load_norton(&s->load, mc),
                                     st->vo + 2.0 * s->w * st->dvo, &pt, &lg, &evals);
    os_load_finish(&s->load, mc, lg.out, &lsg);
    const double xg = lg.x;
    os_load_c_bdf2(&s->load, &st->ls, &lsg, mc);
    const double c2 = OS_TRBDF2_A * xg - OS_TRBDF2_B * st->x;
    const double vo1 = solve_speaker(s, c2, vin, os_load_norton(&s->load, mc),
                                     vog + (vog - st->vo) * ((1.0 - g) / g), &pt, &l1, &evals);
    os_load_finish(&s->load, mc, l1.out, &ls1);
    /* Settings far outside physical sense (2 V of bias across 0.4 V
     * junctions: gigaamperes of idle current, transistors saturated by volts
     * near the rails) can leave the solve on Ebers-Moll's continued
     * exponentials, where nothing usable comes out: a step whose solution
     * leaves the circuit's reach by far (a load voltage beyond four times
     * the rail and 10 V, or anything not finite) is not taken; the state
     * holds for this step. Found by tests/plugin/test_rt_safety.c. */
    const double reach_v = 4.0 * s->want_vmax + 10.0;
    int sane = fabs(l1.out) <= reach_v && fabs(lg.out) <= reach_v && fabs(vo1) <= reach_v &&
               isfinite(l1.x) && isfinite(l1.f) && isfinite(l1.df) && isfinite(l1.dx);
    for (int i = 0; i < 3; ++i) {
        sane = sane && isfinite(ls1.y[i]) && isfinite(ls1.my[i]);
    }
    if (!sane) {
        r->vmid = r->vload = st->vl;
        r->dvmid = r->dvload = 0.0;
        r->jac = 0.0;
        r->iload = st->ls.y[0];
        r->dissipation = 0.0;
        r->limiting = 0;
        r->iters = evals;
        r->ind_mid[0] = r->ind[0] = 0.0;
        r->ind_weight[0] = 0.0;
        return;
    }
    double x = l1.x, fx = (x - c2) / s->w;
    if (fabs(fx) < 1e-30) {
        fx = 0.0;
    }
    if (fabs(x) < 1e-30) {
        x = 0.0;
    }
    const double h = s->h, tg = g * h, v0 = st->vl;
    st->x = x;
    st->fx = fx;
    st->vo = fabs(vo1) < 1e-30 ? 0.0 : vo1;
    st->vin = vin;
    st->dvo = fx / l1.dx;
    st->ls = ls1;
    st->vl = l1.out;
    st->pt = pt;
    s->limit = l1.limit;
    r->vmid = lg.out;
    r->dvmid = quad_slope(v0, lg.out, l1.out, tg, h, tg);
    r->vload = l1.out;
    r->dvload = quad_slope(v0, lg.out, l1.out, tg, h, h);
    /* The loop derivative at an instant, where the coil's current is a state
     * (with Le = 0 the coil is Re to the motional voltage): the network's
     * slopes at that conductance, not the sub-step's, which depends on the
     * step's length, so that a step taken in halves does not look like a
     * change of regime (os_trajectory.c) and call for halving again. */
    const double gi = s->gfb_out + (s->load.le > 0.0 ? 0.0 : 1.0 / s->load.re);
    double dout_i, dib_i;
    os_follower_slopes(&s->want, &pt, gi, &dout_i, &dib_i);
    const double dio_i = dib_i + s->gfb_pin, dx_i = 1.0 + s->op.rs * dio_i;
    const double dvfb_i = s->loop ? dout_i : 1.0;
    r->jac = (l1.f_x * dx_i - l1.f_vd * s->inv_g * dvfb_i + l1.f_io * dio_i) / dx_i;
    r->iload = ls1.y[0];
    r->dissipation = pt.pd;
    r->limiting = s->limit > OS_LIMITING_SHARE;
    r->iters = evals;
    r->ind_mid[0] = os_opamp_indicator(&s->op, lg.vd);
    r->ind[0] = os_opamp_indicator(&s->op, l1.vd);
    r->ind_weight[0] = l1.limit < 1.0 ? 1.0 - l1.limit : 0.0;
}

static void step(void *c, double vin, double vin_g, OsStepResult *r)
{
    OsPushpullCircuit *s = c;
    if (s->load.speaker) {
        step_speaker(s, vin, vin_g, r);
        return;
    }
    const double g = OS_TRBDF2_G;
    int evals = 0;
    State *st = &s->st;
    const double dvo0 = st->dvo;
    /* trapezoidal sub-step to t + g h, then BDF2 to t + h */
    const double c1 = st->x + s->w * st->fx;
    Loop lg, l1;
    const double vog = solve_substep(s, c1, vin_g, st->vo + 2.0 * s->w * dvo0, &lg, &evals);
    const double xg = lg.x;
    const double c2 = OS_TRBDF2_A * xg - OS_TRBDF2_B * st->x;
    const double vo1 =
        solve_substep(s, c2, vin, vog + (vog - st->vo) * ((1.0 - g) / g), &l1, &evals);
    double x = l1.x, fx = (x - c2) / s->w;
    const double fg = (xg - c1) / s->w;
    if (fabs(fx) < 1e-30) {
        fx = 0.0;
    }
    if (fabs(x) < 1e-30) {
        x = 0.0; /* keep subnormals out of the state */
    }
    st->x = x;
    st->fx = fx;
    st->vo = fabs(vo1) < 1e-30 ? 0.0 : vo1;
    st->vin = vin;
    st->dvo = fx / l1.dx;
    s->limit = l1.limit;

    /* The load voltage and its slope d(out)/dvo dvo/dt at the inner point and
     * at the end (os_window.h); the loop derivative d(dx/dt)/dx for the
     * refinement test (os_trajectory.c). */
    r->vmid = lg.out;
    r->dvmid = lg.dout * fg / lg.dx;
    r->vload = l1.out;
    st->vl = l1.out; /* for a switch to the loudspeaker */
    r->dvload = l1.dout * fx / l1.dx;
    r->jac = l1.df / l1.dx;
    r->iload = l1.out * s->g_load;
    double pd = os_follower_map_pd(&s->map[s->cur], st->vo);
    if (s->blend > 0.0) {
        pd += s->blend * (os_follower_map_pd(&s->map[!s->cur], st->vo) - pd);
    }
    r->dissipation = pd;
    r->limiting = s->limit > OS_LIMITING_SHARE;
    r->iters = evals;
    r->ind_mid[0] = os_opamp_indicator(&s->op, lg.vd);
    r->ind[0] = os_opamp_indicator(&s->op, l1.vd);
    r->ind_weight[0] = l1.limit < 1.0 ? 1.0 - l1.limit : 0.0;
}

/* The regime indicators are the op-amp's alone. An indicator of the
 * follower's conduction ((junction voltage - its value at half gain) / VT,
 * located like the op-amp's) was tried: it took the class-B loop-0 tone from
 * -81.8 to -98 dBc at 4x, but cost three to five times as much on bright
 * material (a transistor turns on and off twice a cycle, every cycle), and
 * made the loop-1 tone worse at 8x and 16x (-93 and -116 against -111 and
 * -119 dBc). The loop derivative's halving catches the follower's bends
 * instead (refine_depth 2). */
const OsCircuitOps os_circuit_pushpull = {
    .name = "pushpull",
    .size = sizeof(OsPushpullCircuit),
    .state_size = sizeof(State),
    .refine_depth = 2,
    .n_indicators = OS_OPAMP_INDICATORS,
    .indicators = os_opamp_zones,
    .update = update,
    .frame = frame,
    .set_step = set_step,
    .reset = reset,
    .step = step,
    .ok = ok,
    .save = save,
    .restore = restore,
};
