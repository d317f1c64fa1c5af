-- ca_line_cfar: a small cell-averaging CFAR for a range line, written by hand
-- in VHDL-2008 for cfarvec's tests (it is not a translation of the Verilog
-- reference core, whose structure it does not share: no running sums, no
-- separate pipeline stages, its own port names, an active-low reset and its
-- own output word layout).
--
-- Arithmetic: docs/bit-true.md sections 2 to 8 for kind "ca" with the
-- "skip" or "zero-pad" edge policy: S = S_lag + S_lead over a window held
-- whole in a shift register, in VHDL integers (so S * A must stay below
-- 2^30; refused at elaboration otherwise), P = S * A, T0 = P >> d (floor) or
-- (P + 2^(d-1)) >> d (half-up), T saturated or wrapped to G_TBITS bits,
-- det = (x << F_T) > T (or >=), T and det forced to 0 where the window is
-- not valid under "skip". Timing: docs/bit-true.md section 9 (a drain of
-- H = R + G zeros after each frame's last sample), one output register.
--
-- Output word, LSB first: last marker (bit 0), window-valid (1), det (2),
-- threshold (3 ..), CUT (3 + G_TBITS ..). No separate last output.
library ieee;
use ieee.std_logic_1164.all;
use ieee.numeric_std.all;

entity ca_line_cfar is
    generic (
        -- Sample width W_in.
        G_INPUT_BITS : positive := 12;
        -- Reference cells per side R.
        G_REF        : positive := 8;
        -- Guard cells per side G.
        G_GUARD      : natural  := 2;
        -- Side-sum width W_S.
        G_SUM_BITS   : positive := 15;
        -- The constant A.
        G_ALPHA      : positive := 1;
        -- Product fraction bits dropped, d.
        G_DROP       : natural  := 0;
        -- Threshold fraction bits F_T.
        G_TFRAC      : natural  := 0;
        -- Threshold width W_T.
        G_TBITS      : positive := 16;
        -- Rounding of the dropped bits: 0 = floor, 1 = half-up.
        G_ROUNDING   : natural  := 0;
        -- Threshold overflow: 0 = saturate, 1 = wrap.
        G_WRAP       : natural  := 0;
        -- Decision: 0 = CUT > T, 1 = CUT >= T.
        G_COMPARE_GE : natural  := 1;
        -- Edge policy: 0 = skip, 1 = zero-pad.
        G_EDGE       : natural  := 0
    );
    port (
        Clock      : in  std_logic;
        -- Synchronous reset, active low.
        Reset_N    : in  std_logic;
        Din        : in  std_logic_vector(G_INPUT_BITS - 1 downto 0);
        Din_Valid  : in  std_logic;
        Din_Ready  : out std_logic;
        Din_Last   : in  std_logic;
        Dout       : out std_logic_vector(G_INPUT_BITS + G_TBITS + 2 downto 0);
        Dout_Valid : out std_logic;
        Dout_Ready : in  std_logic
    );
end entity ca_line_cfar;

architecture whole_window of ca_line_cfar is
    -- Half window H and window length W.
    constant H : natural := G_REF + G_GUARD;
    constant W : natural := 2 * H + 1;
    -- The largest sample, statistic and threshold (this core computes in VHDL integers, so the
    -- product S * A must stay below 2^31: checked below).
    constant X_MAX : natural := 2 ** G_INPUT_BITS - 1;
    constant S_MAX : natural := 2 * G_REF * X_MAX;
    constant T_MAX : natural := 2 ** G_TBITS - 1;

    -- One window cell: the sample, whether it is a sample of a frame (not a drain
    -- or reset zero), and whether it carried the last marker.
    type cell_t is record
        value : natural range 0 to X_MAX;
        real  : boolean;
        last  : boolean;
    end record;
    -- Index 0 is the newest cell (the leading end); the CUT sits at index H.
    type window_t is array (0 to W - 1) of cell_t;
    constant EMPTY : cell_t := (value => 0, real => false, last => false);

    -- A flag as a one-bit vector.
    function flag(b : boolean) return std_logic_vector is
    begin
        if b then
            return "1";
        end if;
        return "0";
    end function;

    signal drain     : natural range 0 to H := 0;
    signal out_word  : std_logic_vector(G_INPUT_BITS + G_TBITS + 2 downto 0) := (others => '0');
    signal out_valid : std_logic := '0';
    signal step_ok   : std_logic;
begin
    assert G_EDGE <= 1 report "ca_line_cfar: only the skip (0) and zero-pad (1) edge policies" severity failure;
    assert G_ROUNDING <= 1 report "ca_line_cfar: only floor (0) and half-up (1) rounding" severity failure;
    assert G_TBITS <= 30 and G_TFRAC + G_INPUT_BITS <= 30 and S_MAX <= (2 ** 30) / G_ALPHA
        report "ca_line_cfar: the product S * A must stay below 2^30 (integer arithmetic)" severity failure;

    -- The window moves when the output register is free or being emptied.
    step_ok    <= '1' when out_valid = '0' or Dout_Ready = '1' else '0';
    Din_Ready  <= '1' when step_ok = '1' and drain = 0 else '0';
    Dout       <= out_word;
    Dout_Valid <= out_valid;

    -- The window and the CUT's sample index are registers kept in process variables.
    process (Clock)
        variable win       : window_t := (others => EMPTY);
        variable cut_count : natural := 0;
        variable moved     : boolean;
        variable stat      : natural;
        variable t_full    : natural;
        variable t_out     : natural;
        variable n         : natural;
        variable lag_ok    : boolean;
        variable lead_ok   : boolean;
        variable det       : boolean;
        variable cut       : cell_t;
    begin
        if rising_edge(Clock) then
            if Reset_N = '0' then
                win       := (others => EMPTY);
                drain     <= 0;
                cut_count := 0;
                out_valid <= '0';
                out_word  <= (others => '0');
            elsif step_ok = '1' then
                moved := false;
                if drain > 0 then
                    win := EMPTY & win(0 to W - 2);
                    drain <= drain - 1;
                    moved := true;
                elsif Din_Valid = '1' then
                    win := cell_t'(value => to_integer(unsigned(Din)), real => true, last => Din_Last = '1')
                           & win(0 to W - 2);
                    if Din_Last = '1' then
                        drain <= H;
                    end if;
                    moved := true;
                end if;

                cut := win(H);
                if not moved or not cut.real then
                    out_valid <= '0';
                else
                    stat := 0;
                    for k in 0 to G_REF - 1 loop
                        stat := stat + win(k).value + win(W - 1 - k).value;
                    end loop;
                    if G_ROUNDING = 1 and G_DROP > 0 then
                        t_full := (stat * G_ALPHA + 2 ** (G_DROP - 1)) / 2 ** G_DROP;
                    else
                        t_full := (stat * G_ALPHA) / 2 ** G_DROP;
                    end if;
                    if G_WRAP = 1 then
                        t_out := t_full mod (T_MAX + 1);
                    else
                        t_out := minimum(t_full, T_MAX);
                    end if;
                    n := cut_count;
                    lag_ok := n >= H;
                    lead_ok := true;
                    for k in 1 to H loop
                        if win(k).last then
                            lead_ok := false;
                        end if;
                    end loop;
                    if G_COMPARE_GE = 1 then
                        det := cut.value * 2 ** G_TFRAC >= t_out;
                    else
                        det := cut.value * 2 ** G_TFRAC > t_out;
                    end if;
                    if G_EDGE = 0 and not (lag_ok and lead_ok) then
                        t_out := 0;
                        det := false;
                    end if;
                    out_word <= std_logic_vector(to_unsigned(cut.value, G_INPUT_BITS))
                                & std_logic_vector(to_unsigned(t_out, G_TBITS)) & flag(det)
                                & flag(lag_ok and lead_ok) & flag(cut.last);
                    out_valid <= '1';
                    if cut.last then
                        cut_count := 0;
                    else
                        cut_count := n + 1;
                    end if;
                end if;
            end if;
        end if;
    end process;
end architecture whole_window;
