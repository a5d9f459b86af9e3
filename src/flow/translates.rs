//! Flows of flux arrays whose terms carry momentum per translate, and the
//! notes of the plan.
//!
//! A charged term in an array with `momentum_per_wire` has momentum
//! k_j = k_0 + j dk on the translate anchored at wire j
//! ([`crate::core::momentum::per_translate`]). A finite array then flows every
//! translate as its own channel ([`super::channels::Plan::split`]). Two
//! cases cannot be flowed and are refused, naming the term: an infinite
//! array (no finite set of cut-offs, and no translation invariance for the
//! q-space flow), and a periodic ring of W wires on which the translates'
//! momenta do not close, W dk not a multiple of the momentum period G (the
//! translate after W - 1 would need a momentum the first one does not
//! have).

use super::Flow;
use crate::core::momentum::{per_translate, reduce_momentum};
use crate::error::{Error, InputError};
use crate::model::Boundary;

impl Flow<'_> {
    /// Refuse a point at which a term's momentum depends on the translate
    /// in a way the flow cannot follow (see the module docs).
    pub(super) fn check_translate_momenta(&self, point: &[f64]) -> Result<(), Error> {
        let sys = self.sys;
        let lat = &sys.lattice;
        let g = sys.model.momentum_period_at(point);
        let nets = self
            .plan
            .per_translate
            .iter()
            .zip(&self.plan.per_translate_net);
        for (&i, net) in nets {
            let Some(dk) = per_translate::shift(&sys.model, net, point) else {
                continue;
            };
            if reduce_momentum(dk, g) == 0.0 || lat.wires == 1 && !sys.is_infinite() {
                continue;
            }
            let name = &sys.model.terms[i].name;
            let why = if sys.is_infinite() {
                format!("its momentum changes by {dk} from one translate to the next (momentum_per_wire acting on a term with net particle number {}), so its translates have different cut-offs ell_k; an infinite array flows translation-invariant families only: use a finite array (its translates flow one by one) or a momentum_per_wire that leaves the term's momentum unchanged", fmt_net(net))
            } else if lat.boundary == Some(Boundary::Periodic)
                && reduce_momentum(lat.wires as f64 * dk, g) != 0.0
            {
                format!("its momentum changes by {dk} from one translate to the next (momentum_per_wire acting on a term with net particle number {}), and on a periodic ring of {} wires {} times that, {}, is not a multiple of the momentum period{}: the translates' momenta do not close around the ring; use an open array, or momenta for which {} dk is a multiple of momentum_period", fmt_net(net), lat.wires, lat.wires, lat.wires as f64 * dk, g.map_or(" (the model gives none)".to_string(), |g| format!(" G = {g}")), lat.wires)
            } else {
                continue;
            };
            return Err(Error::Input(InputError::new(
                &sys.model.file,
                format!("term \"{name}\""),
                why,
            )));
        }
        Ok(())
    }

    /// The plan's notes for the report.
    pub(super) fn plan_notes(&self) -> Vec<String> {
        let mut notes: Vec<String> = self.plan.range_note.iter().cloned().collect();
        if self.plan.split {
            let names: Vec<&str> = self
                .plan
                .per_translate
                .iter()
                .map(|&i| self.sys.model.terms[i].name.as_str())
                .collect();
            notes.push(format!(
                "the momentum of {} depends on the translate (momentum_per_wire, charged terms): every translate of every term flows as its own channel (name@wire) with its own cut-off ell_k, and D is carried as a dense matrix",
                names.join(", ")
            ));
        }
        notes
    }
}

impl Flow<'_> {
    /// For each model term, the position in `included` of the channel that
    /// shows it: the term itself, or (split plans) the translate anchored
    /// where the term's family has its representative.
    pub(super) fn listed_rows(&self, included: &[usize]) -> Vec<Option<usize>> {
        let fams = &self.sys.lattice.families;
        (0..self.sys.model.terms.len())
            .map(|t| {
                included.iter().position(|&c| {
                    self.plan.term_of(c) == Some(t)
                        && self.plan.channels[c].family.rep().anchor == fams[t].rep().anchor
                })
            })
            .collect()
    }
}

/// N_c as "(a, b, ...)".
fn fmt_net(net: &[crate::math::rational::Rational]) -> String {
    let parts: Vec<String> = net
        .iter()
        .map(crate::math::rational::fmt_rational)
        .collect();
    format!("({})", parts.join(", "))
}
