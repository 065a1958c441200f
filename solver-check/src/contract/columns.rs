//! Column names of the dataset's tables. A column is named by its owner
//! (a conductor such as `l1` or `n`, `total`, or an appliance id, with
//! `{id}_{conductor}` for an appliance's part on one line) and its
//! quantity with unit: `l1_p_w`, `n_i_a`, `fridge_state`, `dryer_l2_p_w`.

/// The time column of every table of readings.
pub const TIME: &str = "time";
/// Total real power of the meter, W.
pub const TOTAL_P: &str = "total_p_w";
/// Total reactive power of the meter, var.
pub const TOTAL_Q: &str = "total_q_var";
/// Neutral current, A.
pub const NEUTRAL_I: &str = "n_i_a";
/// Truth: the real power of loads no appliance column holds, W.
pub const UNMETERED_P: &str = "unmetered_p_w";
/// The ending of every real-power column.
pub const P_SUFFIX: &str = "_p_w";

/// Real power of `owner`, W: `l1_p_w`, `fridge_p_w`.
pub fn p(owner: &str) -> String {
    format!("{owner}{P_SUFFIX}")
}

/// Reactive power of `owner`, var.
pub fn q(owner: &str) -> String {
    format!("{owner}_q_var")
}

/// Voltage of a line to neutral, V: `l1_v_v`.
pub fn v(line: &str) -> String {
    format!("{line}_v_v")
}

/// Current of a conductor, A: `l1_i_a`.
pub fn i(conductor: &str) -> String {
    format!("{conductor}_i_a")
}

/// Energy register of a line, Wh: `l1_energy_wh`.
pub fn energy(line: &str) -> String {
    format!("{line}_energy_wh")
}

/// An appliance's state name: `fridge_state`.
pub fn state(id: &str) -> String {
    format!("{id}_state")
}

/// The owner name of appliance `id`'s part on conductor `line`:
/// `dryer_l2` (its power column is `p(&on_line(id, line))`).
pub fn on_line(id: &str, line: &str) -> String {
    format!("{id}_{line}")
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The names the dataset contract documents (README, "Dataset").
    #[test]
    fn names_follow_the_contract() {
        let l2 = crate::contract::line_name(1);
        assert_eq!(p(&l2), "l2_p_w");
        assert_eq!(q("total"), TOTAL_Q);
        assert_eq!(i(crate::contract::NEUTRAL_NAME), NEUTRAL_I);
        assert_eq!(p(&on_line("dryer", &l2)), "dryer_l2_p_w");
        assert_eq!(energy("l3"), "l3_energy_wh");
        assert_eq!(state("fridge"), "fridge_state");
    }
}
