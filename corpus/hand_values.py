"""The closed-form values behind every ``[[expect]]`` of the corpus, evaluated in double precision.

Each function evaluates, at one frequency, the formula that its case's ``how`` states
(series and parallel reduction, dividers, source transformations, transformer
reflection), from the element values of the case's netlist, each written here with a
comment naming the netlist line it comes from. It returns the expected quantities as
Python complex numbers (``series_*`` as floats). These are not hand calculations: a
person working the same formulas to 4 figures near a resonance can land far from
these values. The case files state these values rounded as their ``how`` says, and
``tests/test_corpus_hand_calcs.py`` checks that they still agree.

Run ``python corpus/hand_values.py`` to print every value to 5 significant figures
(angles to 0.001 degree), in the case files' notation. Standard library only (``cmath``,
``math``), and independent of crosscheck, so it is a second derivation rather than a
copy of the solver.
"""

from __future__ import annotations

import cmath
import math

TAU = 2.0 * math.pi
#: Significant figures the case files state, and decimals of a degree for angles.
SIG = 5
ANGLE_DECIMALS = 3


def par(*z: complex) -> complex:
    """Parallel combination of impedances."""
    return 1.0 / sum(1.0 / x for x in z)


def zl(henry: float, w: float) -> complex:
    return 1j * w * henry


def zc(farad: float, w: float) -> complex:
    return 1.0 / (1j * w * farad)


def _dc(f_hz: float) -> None:
    if f_hz != 0:
        raise ValueError(f"a DC formula evaluated at {f_hz} Hz")


# ------------------------------------------------------------------ audio


def guitar_pickup_cable(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    emf = 0.1  # Vemf emf 0 AC 0.1 0
    rdc = 7.5e3  # Rdc emf w1 7.5k
    lcoil = 3.8  # Lcoil w1 tip 3.8
    cwind = 110e-12  # Cwind tip 0 110p
    rvol = 500e3  # Rvol tip 0 500k
    rtone = 500e3  # Rtone tip tn 500k
    ctone = 22e-9  # Ctone tn 0 22n
    ccable = 5 * 100e-12  # Ccable tip 0 {cable_len*cable_c_per_m}, .param cable_len=5 cable_c_per_m=100p
    z_sh = par(rvol, rtone + zc(ctone, w), zc(cwind + ccable, w))
    z_s = rdc + zl(lcoil, w)
    return {"vth": emf * z_sh / (z_s + z_sh), "zth": par(z_s, z_sh)}


def headphone_output(f_hz: float) -> dict[str, complex]:
    vin = 0.5  # Vin in 0 AC 0.5 0
    a = 5000.0  # Eop o_int 0 in inv 5000 (flat in frequency, so f_hz does not enter)
    ro = 40.0  # Ro o_int opout 40
    rf = 2e3  # Rf opout inv 2k
    rg = 1e3  # Rg inv 0 1k
    rbo = 1.0  # Rbo opout jack 1
    beta = rg / (rf + rg)
    vo = (a * vin / ro) / (1 / (rf + rg) + (1 + a * beta) / ro)
    return {"vth": complex(vo), "zth": complex(rbo + par(ro / (1 + a * beta), rf + rg))}


def _mixer_values() -> tuple[float, float, float, float, float, float, float, float, float]:
    rin = 10e3  # Rin dac inv 10k
    rfb = 10e3  # Rfb inv opout 10k
    a = 1e6  # Egain opout 0 0 inv 1Meg
    rbuild = 100.0  # Rbuild opout jack {rbuild}, .param rbuild=100
    cblock = 10e-6  # Cblock jack jack_ac {cblock}, .param cblock=10u
    rbias = 47e3  # Rbias jack_ac 0 47k
    rser = 0.05  # Rser in mid 0.05 (in .subckt cable_section, two instances X1, X2)
    lser = 0.75e-6  # Lser mid out 0.75u
    csh = 3 * 100e-12 / 2 / 2  # Csh1, Csh2 {cable_c/2}, .param cable_c = {3 * 100p / 2}
    return rin, rfb, a, rbuild, cblock, rbias, rser, lser, csh


def mixer_line_out(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    rin, rfb, a, rbuild, cblock, rbias, rser, lser, csh = _mixer_values()
    vo = -1.0 * (rfb / rin) / (1 + (1 + rfb / rin) / a)  # Vdac dac 0 DC 0 AC 1.0 0
    v, z = vo, rbuild + zc(cblock, w)
    for shunt in (par(rbias, zc(csh, w)), zc(2 * csh, w)):  # X1.Csh1 at jack_ac; X1.Csh2 + X2.Csh1 at mid_cable
        v, z = v * shunt / (z + shunt), par(z, shunt)
        z = z + rser + zl(lser, w)
    shunt = zc(csh, w)  # X2.Csh2 at far_end
    return {"vth": v * shunt / (z + shunt), "zth": par(z, shunt)}


def mixer_line_out_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    *_, rbias, rser, _lser, _csh = _mixer_values()
    return {"zth": complex(rbias + 2 * rser)}


def stage_box_line_transformer(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v = 1.228  # Vsend send 0 AC 1.228 0 (rms)
    rbuild = 50.0  # Rbuild send p1 50
    rpri = 42.0  # Rpri p1 p2 42
    l1 = 5.0  # Lpri p2 0 5
    l2 = 5.0  # Lsec s1 sec_cold 5
    rsec = 48.0  # Rsec sec_hot s1 48
    k = 0.99995  # K1 Lpri Lsec 0.99995
    m = k * math.sqrt(l1 * l2)
    zp = rbuild + rpri + zl(l1, w)
    return {"vth": 1j * w * m * v / zp, "zth": rsec + zl(l2, w) + (w * m) ** 2 / zp}


# ------------------------------------------------------------------ control


def _tacho_values() -> tuple[float, float, float, float, float, float, float]:
    v = 7e-3 * 1500  # Vtacho t 0 AC {kt*rpm} 0, .param kt=7m rpm=1500
    ra = 160.0  # Ra t t1 160
    la = 45e-3  # La t1 t2 45m
    rfil = 1e3  # Rfil t2 f1 1k
    cfil = 10e-6  # Cfil f1 0 10u
    rtop = 10e3  # Rtop f1 fb 10k
    rbot = 2.2e3  # Rbot fb 0 2.2k
    return v, ra, la, rfil, cfil, rtop, rbot


def conveyor_tacho_feedback_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    v, ra, _la, rfil, _cfil, rtop, rbot = _tacho_values()
    return {"vth": complex(v * rbot / (ra + rfil + rtop + rbot)), "zth": complex(par(ra + rfil + rtop, rbot))}


def conveyor_tacho_feedback(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v, ra, la, rfil, cfil, rtop, rbot = _tacho_values()
    za, zcap = ra + zl(la, w) + rfil, zc(cfil, w)
    v1, z1 = v * zcap / (za + zcap), par(za, zcap)
    return {"vth": v1 * rbot / (z1 + rtop + rbot), "zth": par(z1 + rtop, rbot)}


def error_amp_type2(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v = 1.0  # Vpert vout 0 AC 1 0
    rtop = 90e3  # Rtop vout fb 90k
    rbot = 10e3  # Rbot fb 0 10k
    gm = 1.2e-3  # Gea comp 0 fb 0 1.2m
    roea = 2e6  # Roea comp 0 2Meg
    rc = 22e3  # Rc comp cz 22k
    cc = 4.7e-9  # Cc cz 0 4.7n
    chf = 100e-12  # Chf comp 0 100p
    v_fb = v * rbot / (rtop + rbot)
    z_comp = par(roea, rc + zc(cc, w), zc(chf, w))
    return {"vth": -gm * v_fb * z_comp, "zth": z_comp}


def oven_pi_controller(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    vin = 1.0  # Verr err 0 AC 1 0
    rin = 100e3  # Rin err inv 100k
    rf = 470e3  # Rf inv fz 470k
    cf = 1e-6  # Cf fz ctl 1u
    rid = 1e6  # Rid inp inn 1Meg (in .subckt opamp)
    gm1, a0, fpole = 1e-3, 1e5, 10.0  # .param a0=1e5 fpole=10 gm1=1m
    rpole = a0 / gm1  # Rp out 0 {rpole}, .param rpole={a0/gm1}
    cpole = 1 / (TAU * fpole * rpole)  # Cp out 0 {cpole}
    riso = 10e3  # Riso ctl ssr 10k
    cflt = 1e-6  # Cflt ssr 0 1u
    a = gm1 * par(rpole, zc(cpole, w))  # Gp into Rp || Cp, then Ebuf (gain 1): 1e5/(1 + j f/10 Hz)
    zf = rf + zc(cf, w)
    vo = -vin * (zf / rin) / (1 + (1 + zf / par(rin, rid)) / a)
    z_c = zc(cflt, w)
    return {"vth": vo * z_c / (riso + z_c), "zth": par(riso, z_c)}


def _valve_values() -> tuple[float, float, float, float, float, float]:
    i = 0.6 * 1.0  # Vcmd cmd 0 AC 0.6 0 and Gdrv 0 drv cmd 0 1
    ro = 200e3  # Rodrv drv 0 200k
    co = 1e-9  # Codrv drv 0 1n
    rch = 80e-3  # Rch drv ch1 80m
    lch = 100e-6  # Lch ch1 coil_p 100u
    return i, ro, co, rch, lch, 0.0


def relief_valve_driver_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    i, ro, _co, rch, _lch, _ = _valve_values()
    return {"in": complex(i * ro / (ro + rch)), "yn": complex(1 / (ro + rch))}


def relief_valve_driver(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    i, ro, co, rch, lch, _ = _valve_values()
    z_o, z_ch = par(ro, zc(co, w)), rch + zl(lch, w)
    return {"in": i * z_o / (z_o + z_ch), "yn": 1 / (z_ch + z_o)}


# ------------------------------------------------------------------ instrumentation


def _cell_values() -> tuple[float, float, float]:
    v = 0.25 * 2.0  # Hsense hout 0 Vsense 0.25 times Iexc 0 cellp AC 2
    r = 20.0 + 470.0  # Rout hout ampo 20, Raa ampo adc 470
    c = 2.2e-9  # Caa adc 0 2.2n
    return v, r, c


def cell_current_sense_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    v, r, _c = _cell_values()
    return {"vth": complex(v), "zth": complex(r)}


def cell_current_sense(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v, r, c = _cell_values()
    d = 1 + 1j * w * r * c
    return {"vth": v / d, "zth": r / d}


def crane_hook_bridge_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    v = 10.0  # Vexc ex 0 DC 10 AC 10
    r_t = 350 * (1 + 2.1 * 800e-6)  # R2 sp 0 {r_t}, R3 ex sn {r_t}; .param r0=350 gf=2.1 strain=800u
    r_c = 350 * (1 - 0.3 * 2.1 * 800e-6)  # R1 ex sp {r_c}, R4 sn 0 {r_c}; .param nu=0.3
    lead = 5.0  # Rlead_p sp out_p 5, Rlead_n sn out_n 5
    vth = v * r_t / (r_c + r_t) - v * r_c / (r_t + r_c)
    return {"vth": complex(vth), "zth": complex(2 * par(r_t, r_c) + 2 * lead)}


def _ph_values() -> tuple[float, float, float]:
    e = 0.1775  # Vcell gi 0 AC 0.1775
    r = 250e6 + 5e3  # Rglass gi glass 250Meg, Rref 0 ref 5k
    c = 300e-12  # Ccable glass ref 300p
    return e, r, c


def ph_probe_cable_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    e, r, _c = _ph_values()
    return {"vth": complex(e), "zth": complex(r)}


def ph_probe_cable(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    e, r, c = _ph_values()
    d = 1 + 1j * w * r * c
    zth = r / d
    return {"vth": e / d, "zth": zth, "series_r": zth.real, "series_c": -1 / (w * zth.imag)}


def valve_spool_lvdt(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v = 3.0  # Vosc osc 0 AC 3 (rms)
    rp = 10.0 + 45.0  # Rosc osc p1 10, Rpri p1 p2 45
    lp = 12e-3  # Lpri p2 0 12m
    la = lb = 20e-3  # Lsa oa mid 20m, Lsb ob mid 20m
    rs = 120.0 + 120.0  # Rsa term_a oa 120, Rsb term_b ob 120
    m_pa = 0.55 * math.sqrt(lp * la)  # Kpa Lpri Lsa 0.55
    m_pb = 0.45 * math.sqrt(lp * lb)  # Kpb Lpri Lsb 0.45
    m_ab = 0.10 * math.sqrt(la * lb)  # Kab Lsa Lsb 0.10
    zp = rp + zl(lp, w)
    dm = m_pa - m_pb
    return {"vth": 1j * w * dm * v / zp, "zth": rs + zl(la + lb - 2 * m_ab, w) + (w * dm) ** 2 / zp}


# ------------------------------------------------------------------ power distribution


def pfc_bank_detuned(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    w1 = TAU * 50  # .param f1=50 w1={2*3.141592653589793*f1}
    cy = 250e3 / (w1 * 400**2)  # Cbank d2 0 {cy}, .param qc=250k un=400, cy={qc/(w1*un**2)}
    ld = 0.07 / (w1**2 * cy)  # Ldet d1 d2 {ld}, .param p=0.07, ld={p/(w1**2*cy)}
    rd = w1 * ld / 50  # Rdet bus d1 {rd}, rd={w1*ld/50}
    z_s = 2.0e-3 + zl(12.5e-3 / w1, w)  # Rsys g s1 2.0m, Lsys s1 bus {12.5m/w1}
    z_b = rd + zl(ld, w) + zc(cy, w)
    v = 230.0  # Vgrid g 0 AC 230 0 (rms)
    return {"vth": v * z_b / (z_s + z_b), "zth": par(z_s, z_b)}


def switchboard_fault_level(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    w50 = TAU * 50  # .param w={2*3.141592653589793*50}: the inductors are X/w50
    c_max, un = 1.10, 400.0  # .param c_max=1.10 un=400
    tr = 11e3 / 420  # .param ur_hv=11k ur_lv=420, tr={ur_hv/ur_lv}
    zq = 1.10 * 11e3**2 / (250e6 * tr**2)  # .param c_q=1.10 unq=11k skq=250meg, zq
    xq, rq = 0.995 * zq, 0.1 * 0.995 * zq  # xq={0.995*zq} rq={0.1*xq}
    zt = 6 / 100 * 420**2 / 1e6  # .param ukr=6 srt=1meg, zt
    rt = 1.05 / 100 * 420**2 / 1e6  # .param urr=1.05, rt
    xt = math.sqrt(zt**2 - rt**2)
    rc, xc = 0.0754 / 1000 * 45 / 2, 0.079 / 1000 * 45 / 2  # .param len=45 runs=2 r_km=0.0754 x_km=0.079
    # RQ, LQ {xq/w}, RT, LT {xt/w}, RC, LC {xc/w} in series from Vsrc to mcc_bus.
    zk = rq + rt + rc + 1j * (xq + xt + xc) * w / w50
    v = c_max * un / math.sqrt(3)  # Vsrc e 0 AC {c_max*un/3**0.5} 0 (rms)
    return {"vth": complex(v), "zth": zk, "in": v / zk, "series_r": zk.real, "series_l": zk.imag / w}


def theatre_it_transformer(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    w50 = TAU * 50  # .param w={2*3.141592653589793*50}
    s, un, i0, uk, ur = 5e3, 230.0, 0.015, 0.028, 0.018  # .param s=5k un=230 i0=0.015 uk=0.028 ur=0.018
    zbase = un**2 / s
    l1 = un / (i0 * s / un) / w50  # Lp p2 0 {l1}
    l2 = l1 * 1.02**2  # Ls s1 it_l2 {l2}
    rw = ur * zbase / 2  # Rp p1 p2 {rw}, Rs it_l1 s1 {rw}
    lsig = math.sqrt((uk * zbase) ** 2 - (ur * zbase) ** 2) / w50
    kc = 1 - lsig / (2 * l1)  # Kit Lp Ls {kc}
    m = kc * math.sqrt(l1 * l2)
    zp = 0.12 + zl(0.05 / w50, w) + rw + zl(l1, w)  # Rsup sup p0 0.12, Lsup p0 p1 {0.05/w}
    v = 230.0  # Vsupply sup 0 AC 230 0 (rms)
    zth = rw + zl(l2, w) + (w * m) ** 2 / zp
    return {"vth": 1j * w * m * v / zp, "zth": zth, "series_r": zth.real, "series_l": zth.imag / w}


def wind_farm_scr(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    w50 = TAU * 50  # .param w={2*3.141592653589793*50}
    un = 33e3  # .param un=33k
    zq = un**2 / 1500e6  # .param skq=1500meg, zq={un**2/skq}
    xq, rq = 0.995 * zq, 0.1 * 0.995 * zq
    zt = 12 / 100 * un**2 / 60e6  # .param srt=60meg ukr=12
    rt = 0.5 / 100 * un**2 / 60e6  # .param urr=0.5
    xt = math.sqrt(zt**2 - rt**2)
    z_src = rq + rt + 1j * (xq + xt) * w / w50  # Rsrc g s1 {rq + rt}, Lsrc s1 sub {(xq + xt)/w}
    z_pi = zc(0.25e-6 * 14 / 2, w)  # Cpi_a sub 0 {0.25u*len/2}, Cpi_b collector 0 (same), .param len=14
    arm = 0.13 * 14 + zl(0.35e-3 * 14, w)  # Rcab sub c1 {0.13*len}, Lcab c1 collector {0.35m*len}
    v = un / math.sqrt(3)  # Vgrid g 0 AC {un/3**0.5} 0 (rms)
    v1, z1 = v * z_pi / (z_src + z_pi), par(z_src, z_pi)
    zth = par(z1 + arm, z_pi)
    return {"vth": v1 * z_pi / (z1 + arm + z_pi), "zth": zth, "yn": 1 / zth}


# ------------------------------------------------------------------ power electronics


def gate_drive_transformer(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v = 4 / math.pi * 12  # Vdrv d 0 AC {4/3.141592653589793*vsq} 0, .param vsq=12
    zp = 1.0 + zc(1e-6, w) + 0.15 + zl(400e-6, w)  # Rdrv d d1 1, Cblk d1 p1 1u, Rp p1 p2 0.15, Lp p2 0 400u
    m = 0.995 * 400e-6  # Kgdt Lp Ls 0.995 with Ls s1 hs_src 400u
    zth = 2.2 + 0.15 + zl(400e-6, w) + (w * m) ** 2 / zp  # Rg s2 hs_gate 2.2, Rs s1 s2 0.15
    return {"vth": 1j * w * m * v / zp, "zth": zth, "series_r": zth.real, "series_l": zth.imag / w}


def pv_inverter_lcl(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v = 100.0  # Vbridge br 0 AC 100 0 (rms)
    z1 = 40e-3 + zl(2.2e-3, w)  # R1 br x1 40m, L1 x1 mid 2.2m
    z_c = 2.2 + zc(4.7e-6, w)  # Rdamp mid c1 2.2, Cf c1 0 4.7u
    z2 = 15e-3 + zl(0.47e-3, w)  # R2 mid x2 15m, L2 x2 grid_l 0.47m
    zth = par(z1, z_c) + z2
    return {"zth": zth, "in": v / (z1 + par(z_c, z2)) * z_c / (z_c + z2)}


def rail_second_stage_filter_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    return {"vth": complex(1.0), "zth": complex(5e-3 + 4e-3)}  # Vbrick b 0 AC 1 0; Rsrc 5m, Rdcr 4m


def rail_second_stage_filter(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    z_s = 5e-3 + 4e-3 + zl(1e-6, w)  # Rsrc b b1 5m, Rdcr b1 b2 4m, Lf b2 out 1u
    z_sh = par(2e-3 + zc(22e-6, w), 0.22 + zc(100e-6, w))  # Resr 2m, Cf 22u; Rdamp 0.22, Cdamp 100u
    return {"vth": 1.0 * z_sh / (z_s + z_sh), "zth": par(z_s, z_sh)}  # Vbrick b 0 AC 1 0


def sensefet_phase_current_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    i = 20 * 0.5e-3  # Iph 0 ph AC 20, Fsense 0 sns Vph 0.5m
    return {"vth": complex(i * 150), "zth": complex(150 + 330)}  # Rburden sns 0 150, Rfilt sns adc 330


def sensefet_phase_current(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    i = 20 * 0.5e-3  # Iph 0 ph AC 20, Fsense 0 sns Vph 0.5m
    z1 = par(150.0, zc(47e-9, w))  # Rburden sns 0 150, Cburden sns 0 47n
    z_c = zc(2.2e-9, w)  # Cfilt adc 0 2.2n
    rfilt = 330.0  # Rfilt sns adc 330
    zth = par(z1 + rfilt, z_c)
    return {"vth": i * z1 * z_c / (z1 + rfilt + z_c), "zth": zth, "series_r": zth.real,
            "series_c": -1 / (w * zth.imag)}


# ------------------------------------------------------------------ rf


def _pad_values() -> tuple[float, float, float, float]:
    z0, k = 50.0, 10 ** (20 / 20)  # .param z0=50 att_db=20, kk={10**(att_db/20)}
    rsh = z0 * (k + 1) / (k - 1)  # R1 pin 0 {rsh}, R3 pout 0 {rsh}
    rse = z0 * (k * k - 1) / (2 * k)  # R2 pin mid {rse}
    return 0.2, z0, rsh, rse  # Vgen gen 0 AC 0.2; Rgen gen pin {z0}


def calibration_pad_20db_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    v, z0, rsh, rse = _pad_values()
    v1, z1 = v * rsh / (z0 + rsh), par(z0, rsh)
    return {"vth": complex(v1 * rsh / (z1 + rse + rsh)), "zth": complex(par(z1 + rse, rsh))}


def calibration_pad_20db(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v, z0, rsh, rse = _pad_values()
    v1, z1 = v * rsh / (z0 + rsh), par(z0, rsh)
    arm = rse + zl(2e-9, w)  # L2 mid pout 2n
    z_sh = par(rsh, zc(0.5e-12, w))  # Cpar pout 0 0.5p
    return {"vth": v1 * z_sh / (z1 + arm + z_sh), "zth": par(z1 + arm, z_sh)}


def double_tuned_21m4(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v, rs = 0.1, 4.7e3  # Vrf src 0 AC 0.1; Rs src pri 4.7k
    c1 = c2 = 55e-12  # C1 pri 0 55p, C2 sec 0 55p (in .subckt if_can)
    rl = 1.35  # Rl1 pri p2 1.35, Rl2 sec s2 1.35
    l1 = l2 = 1e-6  # L1 p2 0 1u, L2 s2 0 1u
    rsw = 4.7e3  # Rsw sec 0 4.7k
    m = 0.035 * math.sqrt(l1 * l2)  # K1 L1 L2 0.035
    z_c1 = zc(c1, w)
    v1, z1 = v * z_c1 / (rs + z_c1), par(rs, z_c1)
    zp = z1 + rl + zl(l1, w)
    emf = 1j * w * m * v1 / zp
    arm = rl + zl(l2, w) + (w * m) ** 2 / zp
    z_sh = par(rsw, zc(c2, w))
    return {"vth": emf * z_sh / (arm + z_sh), "zth": par(arm, z_sh)}


def if_stage_455k(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    gm = 1e-3 / 25.85e-3  # Gm c 0 b 0 {gm}; .param ic=1m vt=25.85m, gm={ic/vt}
    rpi = 120 / gm  # Rpi b 0 {rpi}; .param beta=120, rpi={beta/gm}
    ro = 80 / 1e-3  # Ro c 0 {ro}; .param va=80, ro={va/ic}
    lt, ct = 180e-6, 680e-12  # Ltank c 0 {lt}, Ctank c 0 {ct}
    rp = 80 * math.sqrt(lt / ct)  # Rloss c 0 {rp}; .param qu=80, rp={qu*(lt/ct)**0.5}
    z_b = par(8.2e3, rpi, zc(25e-12, w))  # Rbias b 0 8.2k, Cpi b 0 25p
    v_pi = 20e-6 * z_b / (1.5e3 + z_b)  # Vmix src 0 AC 20u, Rsrc src b 1.5k
    z_c = par(ro, rp, zl(lt, w), zc(ct, w))
    return {"vth": -gm * v_pi * z_c, "zth": z_c}


def whip_l_match(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    v, r0 = 100.0, 50.0  # Vtx tx 0 AC 100 (rms); R0 tx a 50
    z_c = zc(780e-12, w)  # Cm a 0 780p
    zth = par(r0, z_c) + 0.28 + zl(1.28e-6, w)  # Rcoil b ant 0.28, Lm a b 1.28u
    return {"vth": v * z_c / (r0 + z_c), "zth": zth, "series_r": zth.real, "series_l": zth.imag / w}


def _weighbridge_values() -> tuple[float, float, float, float, float, float, float, float]:
    # .temp 45; .model tfr R (rsh=100 defw=10u tc1=25e-6 tnom=25): R = rsh * l / w * (1 + tc1 (T - tnom))
    tfr = 1.0 + 25e-6 * (45.0 - 25.0)
    vs = 10e-3  # Vbridge bp 0 DC 0 AC 10m SIN(0 10m 5)
    rarm = 350.0  # Rarm bp in {rarm}, .param rarm=350
    r1 = 100.0 * (20 * 10e-6) / 10e-6 * tfr  # X1 ... squares=20: R1 in out tfr l={squares*10u} w=10u
    c1 = 10e-9  # X1 ... cval={cfilt}, .param cfilt=10n: C1 out 0 {cval}
    r2 = 100.0 * (40 * 10e-6) / 10e-6 * tfr  # X2 ... params: squares=40
    c2 = 10e-9 / 2  # X2 ... cval='cfilt/2'
    cadc = 4.7e-12 * 4  # Cadc adc 0 4.7p m=4
    rleak = 10e6 * (1.0 - 0.002 * (45.0 - 27.0))  # Rleak adc 0 10meg tc1=-0.002 (ngspice's default tnom, 27 degC)
    return vs, rarm, r1, c1, r2, c2, cadc, rleak


def weighbridge_adc_filter_dc(f_hz: float) -> dict[str, complex]:
    _dc(f_hz)
    vs, rarm, r1, _, r2, _, _, rleak = _weighbridge_values()
    series = rarm + r1 + r2
    return {"vth": vs * rleak / (series + rleak), "zth": par(series, rleak)}


def weighbridge_adc_filter(f_hz: float) -> dict[str, complex]:
    w = TAU * f_hz
    vs, rarm, r1, c1, r2, c2, cadc, rleak = _weighbridge_values()
    z1, zc1 = rarm + r1, zc(c1, w)
    v1, zs1 = vs * zc1 / (z1 + zc1), par(z1, zc1)  # first pole as a source behind an impedance
    zs2, zsh = zs1 + r2, par(zc(c2, w), zc(cadc, w), rleak)
    return {"vth": v1 * zsh / (zs2 + zsh), "zth": par(zs2, zsh)}


# ------------------------------------------------------------------ multi-port cases


def chapel_mic_input(f_hz: float) -> dict[str, complex]:
    """A symmetric pair seen from its two legs: the half circuits (differential mode: the phantom node and the
    middle of Rin and of Cx sit at 0 V; common mode: Rin and Cx carry no current)."""
    w = TAU * f_hz
    rph = 6.81e3  # Rph2 hot p48 6.81k, Rph3 cold p48 6.81k
    cdec, esr = 47e-6, 0.5  # Cdec p48 esr 47u, Resr esr 0 0.5
    crf = 470e-12  # Crf2 hot 0 470p, Crf3 cold 0 470p
    cx = 100e-12  # Cx hot cold 100p
    rin = 2.4e3  # Rin hot cold 2.4k
    zdiff = 2 * par(rph, zc(crf, w), rin / 2, zc(2 * cx, w))
    zcomm = par(zc(2 * crf, w), rph / 2 + esr + zc(cdec, w))
    # symmetric Z: zdiff = 2 (z11 - z21), zcomm = (z11 + z21)/2
    return {"zdiff": zdiff, "zcomm": zcomm, "z11": zcomm + zdiff / 4, "z21": zcomm - zdiff / 4}


def cold_store_feeder(f_hz: float) -> dict[str, complex]:
    """Balanced phases with a common return: Zs = Zphase + Zret, Zm = jwM + Zret; Z0 = Zs + 2 Zm, Z1 = Z2 = Zs - Zm."""
    w = TAU * f_hz
    length = 120.0  # .param len=120 (m)
    r = 0.193 * length / 1000  # Ra/Rb/Rc {r_km*len/1000}, r_km=0.193
    ell = 0.40e-3 * length / 1000  # La/Lb/Lc {l_km*len/1000}, l_km=0.40m
    m = 0.4 * ell  # Kab/Kbc/Kca {k_ph}, k_ph=0.4: M = k L
    zret = 0.193 * length / 1000 + 1j * w * 0.25e-3 * length / 1000  # Rret {r_km*len/1000}, Lret {l_ret_km*len/1000}
    zs = r + 1j * w * ell + zret
    zm = 1j * w * m + zret
    return {"z11": zs, "z21": zm, "z0": zs + 2 * zm, "z1": zs - zm, "z2": zs - zm}


#: (case file under corpus/, function, frequency in Hz) for every [[expect]], in file order.
POINTS = (
    ("audio/chapel_mic_input", chapel_mic_input, 1e3),
    ("audio/chapel_mic_input", chapel_mic_input, 20e3),
    ("audio/guitar_pickup_cable", guitar_pickup_cable, 1e3),
    ("audio/guitar_pickup_cable", guitar_pickup_cable, 3.3e3),
    ("audio/headphone_output", headphone_output, 20e3),
    ("audio/mixer_line_out", mixer_line_out, 1e3),
    ("audio/mixer_line_out", mixer_line_out_dc, 0.0),
    ("audio/stage_box_line_transformer", stage_box_line_transformer, 1e3),
    ("audio/stage_box_line_transformer", stage_box_line_transformer, 20.0),
    ("control/conveyor_tacho_feedback", conveyor_tacho_feedback_dc, 0.0),
    ("control/conveyor_tacho_feedback", conveyor_tacho_feedback, 5.0),
    ("control/error_amp_type2", error_amp_type2, 10e3),
    ("control/oven_pi_controller", oven_pi_controller, 0.1),
    ("control/oven_pi_controller", oven_pi_controller, 10.0),
    ("control/relief_valve_driver", relief_valve_driver_dc, 0.0),
    ("control/relief_valve_driver", relief_valve_driver, 150.0),
    ("instrumentation/cell_current_sense", cell_current_sense_dc, 0.0),
    ("instrumentation/cell_current_sense", cell_current_sense, 10e3),
    ("instrumentation/crane_hook_bridge", crane_hook_bridge_dc, 0.0),
    ("instrumentation/ph_probe_cable", ph_probe_cable_dc, 0.0),
    ("instrumentation/ph_probe_cable", ph_probe_cable, 50.0),
    ("instrumentation/valve_spool_lvdt", valve_spool_lvdt, 2.5e3),
    ("instrumentation/weighbridge_adc_filter", weighbridge_adc_filter_dc, 0.0),
    ("instrumentation/weighbridge_adc_filter", weighbridge_adc_filter, 1e3),
    ("power_distribution/cold_store_feeder", cold_store_feeder, 50.0),
    ("power_distribution/cold_store_feeder", cold_store_feeder, 50.0),
    ("power_distribution/pfc_bank_detuned", pfc_bank_detuned, 50.0),
    ("power_distribution/pfc_bank_detuned", pfc_bank_detuned, 250.0),
    ("power_distribution/switchboard_fault_level", switchboard_fault_level, 50.0),
    ("power_distribution/switchboard_fault_level", switchboard_fault_level, 50.0),
    ("power_distribution/theatre_it_transformer", theatre_it_transformer, 50.0),
    ("power_distribution/wind_farm_scr", wind_farm_scr, 50.0),
    ("power_electronics/gate_drive_transformer", gate_drive_transformer, 100e3),
    ("power_electronics/pv_inverter_lcl", pv_inverter_lcl, 16e3),
    ("power_electronics/rail_second_stage_filter", rail_second_stage_filter_dc, 0.0),
    ("power_electronics/rail_second_stage_filter", rail_second_stage_filter, 34e3),
    ("power_electronics/rail_second_stage_filter", rail_second_stage_filter, 500e3),
    ("power_electronics/sensefet_phase_current", sensefet_phase_current_dc, 0.0),
    ("power_electronics/sensefet_phase_current", sensefet_phase_current, 1e3),
    ("rf/calibration_pad_20db", calibration_pad_20db_dc, 0.0),
    ("rf/calibration_pad_20db", calibration_pad_20db, 1e9),
    ("rf/double_tuned_21m4", double_tuned_21m4, 21.4e6),
    ("rf/if_stage_455k", if_stage_455k, 455e3),
    ("rf/if_stage_455k", if_stage_455k, 470e3),
    ("rf/whip_l_match", whip_l_match, 7.1e6),
)

_PREFIXES = ((1e9, "g"), (1e6, "Meg"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"),
             (1e-12, "p"), (1e-15, "f"))


def round_sig(x: float, sig: int = SIG) -> float:
    """``x`` rounded to ``sig`` significant figures."""
    return float(f"{x:.{sig - 1}e}")


def eng(x: float, sig: int = SIG) -> str:
    """``x`` to ``sig`` significant figures with an SI prefix, trailing zeros kept: 47000.1 -> '47.000k'."""
    x = round_sig(x, sig)
    if x == 0:
        return "0"
    scale, prefix = next(((s, p) for s, p in _PREFIXES if abs(x) >= s), _PREFIXES[-1])
    mantissa = x / scale
    decimals = max(sig - 1 - math.floor(math.log10(abs(mantissa)) + 1e-12), 0)
    return f"{mantissa:.{decimals}f}{prefix}"


def rect(z: complex, sig: int = SIG) -> str:
    """'a + jb' with each part to ``sig`` significant figures ('a' alone when b is 0)."""
    if z.imag == 0:
        return eng(z.real, sig)
    return f"{eng(z.real, sig)} {'-' if z.imag < 0 else '+'} j{eng(abs(z.imag), sig)}"


def polar(z: complex, sig: int = SIG) -> str:
    """'m∠a°' with the magnitude to ``sig`` significant figures and the angle to ANGLE_DECIMALS decimals."""
    return f"{eng(abs(z), sig)}∠{math.degrees(cmath.phase(z)):.{ANGLE_DECIMALS}f}°"


def main() -> None:
    for case, function, f_hz in POINTS:
        values = function(f_hz)
        shown = "; ".join(f"{key} = {eng(v) if isinstance(v, float) else rect(v)} = {polar(complex(v))}"
                          for key, v in values.items())
        print(f"{case} {function.__name__}({f_hz:g} Hz): {shown}")


if __name__ == "__main__":
    main()
