// weir_range_filter: a small synthesizable predicate-scan engine.
//
// It reads `in_words` memory words of one u32 column from `in_base`, keeps every row whose
// value v satisfies lo <= v < hi, packs the matching row ids (u32, row_start + local index)
// into output words, lane 0 in the least-significant bits, and writes them to consecutive
// words from `out_base`. A partial last word is zero-padded. Finally it writes the match
// count (u64 in the low bits, rest zero) to `count_base`.
//
// Throughput is one input word per cycle: a word holds at most LANES matches and the
// compaction buffer holds fewer than LANES leftovers, so each input word produces at most
// one full output word and the write port never stalls the reads.
//
//   read port ──► lane compare ──► compaction buffer (2*LANES ids) ──► write port
//   (1-cycle latency)   (mask)        └─ full low half: one output word
//
// All addresses are word addresses. Inputs are sampled on the cycle `start` is high while
// the engine is idle; `done` rises after the count word is written and stays high until the
// next start.
//
// Define WEIR_BUG_OFF_BY_ONE to make the upper bound inclusive (v <= hi): a deliberate bug
// the example flow uses to show that the golden comparison catches it.
module weir_range_filter #(
    parameter integer WORD_BITS = 512,   // a multiple of 32, at least 64 (the count word)
    parameter integer ADDR_BITS = 64
) (
    input  wire                 clk,
    input  wire                 rst,
    // control
    input  wire                 start,
    output reg                  busy,
    output reg                  done,
    input  wire [ADDR_BITS-1:0] in_base,
    input  wire [63:0]          in_words,
    input  wire [63:0]          rows,
    input  wire [31:0]          row_start,
    input  wire [ADDR_BITS-1:0] out_base,
    input  wire [ADDR_BITS-1:0] count_base,
    input  wire [32:0]          lo,          // inclusive; 33 bits like the memory map's bound
    input  wire [32:0]          hi,          // exclusive; 33 bits so that "no upper bound" fits
    // memory read port: data for rd_addr arrives on rd_data the cycle after rd_en
    output reg                  rd_en,
    output reg  [ADDR_BITS-1:0] rd_addr,
    input  wire [WORD_BITS-1:0] rd_data,
    // memory write port
    output reg                  wr_en,
    output reg  [ADDR_BITS-1:0] wr_addr,
    output reg  [WORD_BITS-1:0] wr_data,
    // traffic counters, cleared by start
    output reg  [63:0]          words_read,
    output reg  [63:0]          words_written,
    output reg  [63:0]          match_count
);
    localparam integer LANE_BITS = 32;  // u32 values in, u32 row ids out
    localparam integer LANES = WORD_BITS / LANE_BITS;
    localparam integer FILL_BITS = $clog2(2 * LANES);
    localparam [FILL_BITS:0] FULL = LANES[FILL_BITS:0];  // ids in one output word

    localparam [2:0] S_IDLE  = 3'd0,
                     S_SCAN  = 3'd1,
                     S_FLUSH = 3'd2,
                     S_COUNT = 3'd3,
                     S_DONE  = 3'd4;

    reg [2:0] state;

    // job registers, sampled at start
    reg [ADDR_BITS-1:0] in_base_q, count_base_q;
    reg [63:0] in_words_q, rows_q;
    reg [31:0] row_start_q;
    reg [32:0] lo_q, hi_q;

    reg [63:0] issued;          // read requests sent
    reg        req_valid;       // rd_en is high this cycle
    reg [63:0] req_word;        // index within the partition of the word requested
    reg        data_valid;      // rd_data holds a requested word this cycle
    reg [63:0] data_word;       // index within the partition of that word
    reg [ADDR_BITS-1:0] out_next;

    // Compaction buffer: ids at lanes 0..fill-1, lanes at and above fill are zero.
    reg [2*WORD_BITS-1:0] pack;
    reg [FILL_BITS:0]     fill;

    // ---- lane compare and compaction (combinational) ----
    reg [LANES-1:0]       hit;
    reg [2*WORD_BITS-1:0] pack_next;
    reg [FILL_BITS:0]     total;     // fill + matches in this word
    reg [FILL_BITS:0]     hits;      // matches in this word
    reg [FILL_BITS:0]     slot;      // buffer lane of the next id
    reg [63:0]            word_row;  // local index of the word's lane 0
    reg [63:0]            lane_row;
    reg [LANE_BITS-1:0]   v;
    integer j;

    always @* begin
        pack_next = pack;
        hits = 0;
        slot = fill;
        word_row = data_word * LANES;
        for (j = 0; j < LANES; j = j + 1) begin
            v = rd_data[j*LANE_BITS +: LANE_BITS];
            lane_row = word_row + {32'd0, j[31:0]};
`ifdef WEIR_BUG_OFF_BY_ONE
            hit[j] = data_valid && lane_row < rows_q && {1'b0, v} >= lo_q && {1'b0, v} <= hi_q;
`else
            hit[j] = data_valid && lane_row < rows_q && {1'b0, v} >= lo_q && {1'b0, v} < hi_q;
`endif
            if (hit[j]) begin
                slot = fill + hits;
                pack_next[slot*LANE_BITS +: LANE_BITS] = row_start_q + lane_row[31:0];
                hits = hits + 1'b1;
            end
        end
        total = fill + hits;
    end

    // the count word: u64 count in the low bits, zero above
    wire [WORD_BITS-1:0] count_word;
    assign count_word[63:0] = match_count;
    generate
        if (WORD_BITS > 64) begin : count_pad
            assign count_word[WORD_BITS-1:64] = {(WORD_BITS-64){1'b0}};
        end
    endgenerate

    // ---- control, read issue, output writes ----
    always @(posedge clk) begin
        if (rst) begin
            state <= S_IDLE;
            busy <= 1'b0;
            done <= 1'b0;
            rd_en <= 1'b0;
            wr_en <= 1'b0;
            req_valid <= 1'b0;
            data_valid <= 1'b0;
            words_read <= 64'd0;
            words_written <= 64'd0;
            match_count <= 64'd0;
            pack <= {2*WORD_BITS{1'b0}};
            fill <= 0;
        end else begin
            rd_en <= 1'b0;
            wr_en <= 1'b0;
            case (state)
                S_IDLE, S_DONE: begin
                    if (start) begin
                        in_base_q <= in_base;
                        in_words_q <= in_words;
                        rows_q <= rows;
                        row_start_q <= row_start;
                        count_base_q <= count_base;
                        lo_q <= lo;
                        hi_q <= hi;
                        issued <= 64'd0;
                        req_valid <= 1'b0;
                        data_valid <= 1'b0;
                        out_next <= out_base;
                        pack <= {2*WORD_BITS{1'b0}};
                        fill <= 0;
                        words_read <= 64'd0;
                        words_written <= 64'd0;
                        match_count <= 64'd0;
                        busy <= 1'b1;
                        done <= 1'b0;
                        state <= S_SCAN;
                    end
                end
                S_SCAN: begin
                    // issue the next read; rd_en/rd_addr reach the memory now and its data
                    // is on rd_data one cycle later, so track requests through two stages
                    if (issued < in_words_q) begin
                        rd_en <= 1'b1;
                        rd_addr <= in_base_q + issued[ADDR_BITS-1:0];
                        issued <= issued + 1;
                        words_read <= words_read + 1;
                    end
                    req_valid <= issued < in_words_q;
                    req_word <= issued;
                    data_valid <= req_valid;
                    data_word <= req_word;

                    // consume the word on rd_data
                    if (data_valid) begin
                        match_count <= match_count + {{(63-FILL_BITS){1'b0}}, hits};
                        if (total >= FULL) begin
                            wr_en <= 1'b1;
                            wr_addr <= out_next;
                            wr_data <= pack_next[WORD_BITS-1:0];
                            out_next <= out_next + 1'b1;
                            words_written <= words_written + 1;
                            pack <= pack_next >> WORD_BITS;
                            fill <= total - FULL;
                        end else begin
                            pack <= pack_next;
                            fill <= total;
                        end
                    end else if (issued >= in_words_q && !req_valid) begin
                        state <= S_FLUSH;
                    end
                end
                S_FLUSH: begin
                    if (fill != 0) begin
                        wr_en <= 1'b1;
                        wr_addr <= out_next;
                        wr_data <= pack[WORD_BITS-1:0];
                        out_next <= out_next + 1'b1;
                        words_written <= words_written + 1;
                    end
                    state <= S_COUNT;
                end
                S_COUNT: begin
                    wr_en <= 1'b1;
                    wr_addr <= count_base_q;
                    wr_data <= count_word;
                    words_written <= words_written + 1;
                    busy <= 1'b0;
                    done <= 1'b1;
                    state <= S_DONE;
                end
                default: state <= S_IDLE;
            endcase
        end
    end
endmodule
