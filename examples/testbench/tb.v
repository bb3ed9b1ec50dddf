// Testbench for weir_range_filter driven by a weir output directory.
//
// Compile with (run.sh does this):
//   iverilog -g2005 -I WEIR_OUT -I GEN_DIR -DWEIR_DIR=\"WEIR_OUT/\" -DWEIR_DUMP_DIR=\"DUMP/\" \
//            tb.v range_filter.v
// where WEIR_OUT holds memory_map.vh and GEN_DIR holds weir_tb_names.vh, which run.sh
// generates from memory_map.vh: it maps a partition or channel number to the map's
// P{k}_... / CH{c}_... names, so this file can loop over partitions.
//
// The device model: one memory per channel, preloaded from the channel image with
// $readmemh(CHc_HEX, mem, 0, CHc_WORDS-1) so that the image's @address lines place every
// partition; reads come back one cycle after rd_en. Writes are decoded: a word inside the
// running partition's output region goes to a window memory, a write to its count word to
// a one-word memory; any other write, and any read outside the partition's input region,
// stops the simulation. After each partition the window (whole capacity) and the count
// word are dumped with $writememh, and the engine's counters appended to counters.txt.
`timescale 1ns / 1ps

`ifndef WEIR_DUMP_DIR
`define WEIR_DUMP_DIR ""
`endif

module tb;
`include "memory_map.vh"
`include "weir_tb_names.vh"

    localparam integer W = WEIR_WORD_BITS;
    localparam [63:0] WORD_BYTES = WEIR_WORD_BYTES;
    localparam integer PATH_BITS = 8 * 1024;

    // ---- sizes of the memories, from the map ----
    function [63:0] max_out_capacity(input integer unused);
        integer k;
        begin
            max_out_capacity = 1;
            for (k = 0; k < WEIR_PARTITIONS; k = k + 1)
                if (part_out_capacity(k) > max_out_capacity)
                    max_out_capacity = part_out_capacity(k);
        end
    endfunction
    localparam [63:0] WINDOW_WORDS = max_out_capacity(0);

    reg clk = 1'b0;
    always #5 clk = ~clk;
    reg rst = 1'b1;

    // ---- the running partition, set before each start ----
    integer cur_part = 0;
    integer cur_channel = 0;
    reg [63:0] cur_rows, cur_row_start;
    reg [63:0] cur_in_base_w, cur_in_words, cur_out_base_w, cur_out_cap, cur_count_w;

    // ---- engine ----
    reg start = 1'b0;
    wire busy, done;
    wire rd_en, wr_en;
    wire [63:0] rd_addr, wr_addr;
    wire [W-1:0] rd_data, wr_data;
    wire [63:0] words_read, words_written, match_count;

    weir_range_filter #(.WORD_BITS(W), .ADDR_BITS(64)) dut (
        .clk(clk), .rst(rst),
        .start(start), .busy(busy), .done(done),
        .in_base(cur_in_base_w), .in_words(cur_in_words),
        .rows(cur_rows), .row_start(cur_row_start[31:0]),  // row ids are u32 in the output
        .out_base(cur_out_base_w), .count_base(cur_count_w),
        .lo(TB_PRED_LO), .hi(TB_PRED_HI),
        .rd_en(rd_en), .rd_addr(rd_addr), .rd_data(rd_data),
        .wr_en(wr_en), .wr_addr(wr_addr), .wr_data(wr_data),
        .words_read(words_read), .words_written(words_written), .match_count(match_count)
    );

    // ---- device memory: one preloaded image per channel ----
    wire [W-1:0] ch_rdata [0:WEIR_CHANNELS-1];
    genvar g;
    generate
        for (g = 0; g < WEIR_CHANNELS; g = g + 1) begin : ch
            localparam [63:0] WORDS = ch_words(g);
            reg [W-1:0] mem [0:(WORDS > 0 ? WORDS : 1) - 1];
            reg [W-1:0] rdata;
            initial if (WORDS > 0) $readmemh(ch_hex(g), mem, 0, WORDS - 1);
            always @(posedge clk)
                if (rd_en && cur_channel == g) rdata <= mem[rd_addr];
            assign ch_rdata[g] = rdata;
        end
    endgenerate
    assign rd_data = ch_rdata[cur_channel];

    reg [W-1:0] out_window [0:WINDOW_WORDS-1];
    reg [W-1:0] count_word [0:0];
    reg [63:0] port_reads, port_writes;  // transactions seen on the ports, to check the counters

    always @(posedge clk) begin
        if (rd_en) begin
            port_reads <= port_reads + 1;
            if (rd_addr < cur_in_base_w || rd_addr >= cur_in_base_w + cur_in_words)
                $fatal(1, "partition %0d: read of word 0x%0h outside its input region 0x%0h + %0d words",
                       cur_part, rd_addr, cur_in_base_w, cur_in_words);
        end
        if (wr_en) begin
            port_writes <= port_writes + 1;
            if (wr_addr == cur_count_w)
                count_word[0] <= wr_data;
            else if (wr_addr >= cur_out_base_w && wr_addr < cur_out_base_w + cur_out_cap)
                out_window[wr_addr - cur_out_base_w] <= wr_data;
            else
                $fatal(1, "partition %0d: write to word 0x%0h outside its output region 0x%0h + %0d words and count word 0x%0h",
                       cur_part, wr_addr, cur_out_base_w, cur_out_cap, cur_count_w);
        end
    end

    // ---- byte address -> word address, refusing misaligned bases ----
    function [63:0] word_addr(input [63:0] byte_addr, input integer k);
        begin
            if (byte_addr % WORD_BYTES != 0)
                $fatal(1, "partition %0d: base 0x%0h is not a multiple of %0d bytes", k, byte_addr, WEIR_WORD_BYTES);
            word_addr = byte_addr / WORD_BYTES;
        end
    endfunction

    integer k, fd, empty_fd;
    reg [63:0] i, cycles;
    reg [PATH_BITS-1:0] path;

    initial begin
        if (W % 32 != 0 || W < 64)
            $fatal(1, "WEIR_WORD_BITS = %0d: the engine needs a multiple of 32, at least 64", W);
        port_reads = 0;
        port_writes = 0;
        fd = $fopen({`WEIR_DUMP_DIR, "counters.txt"}, "w");
        if (fd == 0) $fatal(1, "cannot create %0s", {`WEIR_DUMP_DIR, "counters.txt"});
        repeat (2) @(posedge clk);
        rst = 1'b0;

        for (k = 0; k < WEIR_PARTITIONS; k = k + 1) begin
            @(negedge clk);
            cur_part = k;
            cur_channel = part_channel(k);
            cur_rows = part_rows(k);
            cur_row_start = part_row_start(k);
            cur_in_base_w = word_addr(part_in_base(k), k);
            cur_in_words = part_in_words(k);
            cur_out_base_w = word_addr(part_out_base(k), k);
            cur_out_cap = part_out_capacity(k);
            cur_count_w = word_addr(part_count_base(k), k);
            if (cur_channel < 0 || cur_channel >= WEIR_CHANNELS)
                $fatal(1, "partition %0d: channel %0d out of range", k, cur_channel);
            // unwritten words stay x, so a missing write shows up in the comparison
            for (i = 0; i < WINDOW_WORDS; i = i + 1) out_window[i] = {W{1'bx}};
            count_word[0] = {W{1'bx}};
            port_reads = 0;
            port_writes = 0;

            start = 1'b1;
            @(negedge clk);
            start = 1'b0;
            cycles = 0;
            while (!done) begin
                @(negedge clk);
                cycles = cycles + 1;
                if (cycles > cur_in_words + 64)
                    $fatal(1, "partition %0d: engine not done after %0d cycles", k, cycles);
            end
            @(negedge clk);  // let the last write land

            if (port_reads != words_read || port_writes != words_written)
                $fatal(1, "partition %0d: engine counters %0d/%0d disagree with port transactions %0d/%0d",
                       k, words_read, words_written, port_reads, port_writes);

            $sformat(path, "%0sscan.p%0d.out.hex", `WEIR_DUMP_DIR, k);
            if (cur_out_cap > 0) begin
                $writememh(path, out_window, 0, cur_out_cap - 1);
            end else begin
                // no room for ids at all: an empty region is an empty file
                empty_fd = $fopen(path, "w");
                $fclose(empty_fd);
            end
            $sformat(path, "%0sscan.p%0d.count.hex", `WEIR_DUMP_DIR, k);
            $writememh(path, count_word);
            $fdisplay(fd, "%0d %0d %0d", k, words_read, words_written);
            $display("tb: partition %0d on channel %0d: %0d rows, %0d matches, %0d words read, %0d written, %0d cycles",
                     k, cur_channel, part_rows(k), match_count, words_read, words_written, cycles);
        end
        $fclose(fd);
        $display("tb: finished %0d partitions", WEIR_PARTITIONS);
        $finish;
    end
endmodule
